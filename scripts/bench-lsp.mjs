// Benchmark of the language server through the real protocol: cold start (spawn → first diagnostics of an opened
// 3,000-line file) and edit → diagnostics latency over single-character edits (typing into a comment in the middle
// of the file), pushed (publishDiagnostics for the edit's version) and pulled (didChange then textDocument/diagnostic),
// and pushed again while typing a statement into a function body next to that comment.
// Prints one JSON object on stdout (`npm run bench` reads it). Needs the bundle (`npm run build`).
// Usage: node scripts/bench-lsp.mjs [--edits N] [--lines N] [--quick] [--cpu-prof DIR]
// `--cpu-prof DIR` runs the server under `node --cpu-prof` and leaves its profiles in DIR.
import { spawn } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { createProtocolConnection, StreamMessageReader, StreamMessageWriter } from 'vscode-languageserver-protocol/node';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const bin = path.join(root, 'server', 'bin', 'noisewise.js');

function options(argv) {
  const o = { edits: 100, lines: 3000, cpuProf: null, memoryEdits: 10_000 };
  for (let i = 0; i < argv.length; i++) {
    if (argv[i] === '--edits') o.edits = Number(argv[++i]);
    else if (argv[i] === '--lines') o.lines = Number(argv[++i]);
    else if (argv[i] === '--quick') {
      o.edits = 30;
      o.memoryEdits = 2_000;
    } else if (argv[i] === '--memory-edits') o.memoryEdits = Number(argv[++i]);
    else if (argv[i] === '--cpu-prof') o.cpuProf = path.resolve(argv[++i]);
    else throw new Error(`unknown argument ${argv[i]}`);
  }
  return o;
}

/**
 * A Python file of about `lines` lines in the demo scenario: Bayesian layers for river-stage gauges (some with a raw
 * trainable σ, so there are findings to compute), training helpers, and a comment line in the middle to type into.
 */
export function generateFile(lines) {
  const out = ['"""Generated benchmark module: Bayesian layers for river-stage gauges."""', 'import math', '', 'import torch', 'import torch.nn.functional as F', 'from torch import nn', 'from torch.distributions import Normal, kl_divergence', '', ''];
  let i = 0;
  let typingLine = -1;
  while (out.length < lines - 2) {
    const raw = i % 4 === 0;
    out.push(
      `class GaugeLayer${i}(nn.Module):`,
      `    """Station ${i}: weight mean and spread for one gauge's rainfall window."""`,
      '',
      `    def __init__(self, n_in=24, n_out=${(i % 7) + 1}, init_std=${(0.01 * ((i % 9) + 1)).toFixed(2)}):`,
      '        super().__init__()',
      '        self.w_mu = nn.Parameter(torch.zeros(n_out, n_in))',
      raw ? '        self.w_std = nn.Parameter(torch.full((n_out, n_in), init_std))' : '        self.w_log_std = nn.Parameter(torch.full((n_out, n_in), math.log(init_std)))',
      '        self.bias = nn.Parameter(torch.zeros(n_out))',
      '',
      '    def spread(self):',
      raw ? '        return self.w_std' : '        return self.w_log_std.exp()',
      '',
      '    def forward(self, rain):',
      '        eps = torch.randn_like(self.w_mu)',
      raw ? '        w = self.w_mu + self.w_std * eps' : '        w = self.w_mu + self.spread() * eps',
      '        return F.linear(rain, w, self.bias)',
      '',
      '    def kl(self, prior_std=1.0):',
      '        q = Normal(self.w_mu, self.spread())',
      '        p = Normal(torch.zeros_like(self.w_mu), prior_std * torch.ones_like(self.w_mu))',
      '        return kl_divergence(q, p).sum()',
      '',
      '',
      `def stage_loss_${i}(layer, rain, stage, n_train):`,
      '    pred = layer(rain)',
      '    nll = F.mse_loss(pred, stage, reduction="mean")',
      '    return nll + layer.kl() / n_train',
      '',
      '',
    );
    if (typingLine < 0 && out.length >= lines / 2) {
      typingLine = out.length;
      // A comment line to type into, and a function body line to type code into (two lines further down).
      out.push('# Field notes: ', '', 'def field_adjust(stage):', '    ', '    return stage', '', '');
    }
    i++;
  }
  return { text: out.join('\n') + '\n', typingLine, lineCount: out.length + 1 };
}

function percentile(sorted, p) {
  if (sorted.length === 0) return null;
  const rank = Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1));
  return sorted[rank];
}

function summary(samples) {
  const sorted = [...samples].sort((a, b) => a - b);
  const round = (x) => (x === null ? null : Math.round(x * 100) / 100);
  return {
    count: samples.length,
    p50Ms: round(percentile(sorted, 50)),
    p95Ms: round(percentile(sorted, 95)),
    maxMs: round(sorted.at(-1) ?? null),
    meanMs: round(samples.reduce((a, b) => a + b, 0) / Math.max(1, samples.length)),
  };
}

/** Starts the server on a folder with one file; resolves once it is initialized, with timing marks. */
async function startServer(folder, pull, cpuProf, extraNodeArgs = []) {
  const home = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-bench-home-'));
  const t0 = performance.now();
  const nodeArgs = [...extraNodeArgs, ...(cpuProf ? ['--cpu-prof', '--cpu-prof-dir', cpuProf] : [])];
  const child = spawn(process.execPath, [...nodeArgs, bin, 'server', '--stdio'], { cwd: folder, env: { ...process.env, HOME: home, XDG_CACHE_HOME: path.join(home, '.cache') }, stdio: ['pipe', 'pipe', 'inherit'] });
  const connection = createProtocolConnection(new StreamMessageReader(child.stdout), new StreamMessageWriter(child.stdin));
  const waiters = [];
  connection.onNotification('textDocument/publishDiagnostics', (params) => {
    for (const w of [...waiters]) if (w.match(params)) {
      waiters.splice(waiters.indexOf(w), 1);
      w.resolve({ at: performance.now(), params });
    }
  });
  connection.onRequest('workspace/configuration', (p) => p.items.map(() => ({})));
  connection.onRequest('client/registerCapability', () => null);
  connection.onRequest('window/workDoneProgress/create', () => null);
  connection.onRequest('workspace/diagnostic/refresh', () => null);
  connection.listen();
  const capabilities = {
    window: { workDoneProgress: true },
    workspace: { configuration: true, workspaceFolders: true, workspaceEdit: { documentChanges: true }, didChangeWatchedFiles: { dynamicRegistration: true }, diagnostics: pull ? { refreshSupport: true } : undefined },
    textDocument: { publishDiagnostics: { relatedInformation: true, codeDescriptionSupport: true }, hover: { contentFormat: ['markdown'] }, diagnostic: pull ? {} : undefined },
  };
  await connection.sendRequest('initialize', { processId: process.pid, rootUri: pathToFileURL(folder).href, workspaceFolders: [{ uri: pathToFileURL(folder).href, name: 'bench' }], capabilities });
  await connection.sendNotification('initialized', {});
  const waitDiagnostics = (match) => new Promise((resolve) => waiters.push({ match, resolve }));
  return { child, connection, t0, waitDiagnostics };
}

async function stop(server) {
  try {
    await server.connection.sendRequest('shutdown');
    await server.connection.sendNotification('exit');
  } catch {
    server.child.kill('SIGKILL');
  }
  await new Promise((r) => (server.child.exitCode !== null ? r() : server.child.on('exit', r)));
  server.connection.dispose();
}

/** Resident set size of a process in MB (Linux). */
function rssMb(pid) {
  const status = fs.readFileSync(`/proc/${pid}/status`, 'utf8');
  const kb = Number(/VmRSS:\s+(\d+)/.exec(status)?.[1] ?? NaN);
  return Math.round((kb / 1024) * 10) / 10;
}

async function memoryOverEdits(folder, uri, text, typingLine, edits) {
  // --expose-gc lets the server's memory-stats request collect garbage first, so its heap figure is what is live.
  const server = await startServer(folder, false, null, ['--expose-gc']);
  const stats = async (edits) => {
    const m = await server.connection.sendRequest('noisewise/memoryStats');
    const mb = (bytes) => (typeof bytes === 'number' ? Math.round((bytes / 1048576) * 10) / 10 : null);
    return { edits, rssMb: rssMb(server.child.pid), liveHeapMb: mb(m.heapUsedBytes), wasmMb: mb(m.wasmMemoryBytes) };
  };
  const opened = server.waitDiagnostics((p) => p.uri === uri && p.version === 1);
  await server.connection.sendNotification('textDocument/didOpen', { textDocument: { uri, languageId: 'python', version: 1, text } });
  await opened;
  const column = '# Field notes: '.length;
  const samples = [await stats(0)];
  const started = performance.now();
  let version = 1;
  for (let i = 0; i < edits; ) {
    for (let k = 0; k < 10 && i < edits; k++, i++) {
      version++;
      const change = i % 2 === 0 ? { range: { start: { line: typingLine, character: column }, end: { line: typingLine, character: column } }, text: 'x' } : { range: { start: { line: typingLine, character: column }, end: { line: typingLine, character: column + 1 } }, text: '' };
      await server.connection.sendNotification('textDocument/didChange', { textDocument: { uri, version }, contentChanges: [change] });
    }
    const target = version;
    await server.waitDiagnostics((p) => p.uri === uri && p.version === target);
    if (i % 1000 === 0) samples.push(await stats(i));
  }
  const seconds = (performance.now() - started) / 1000;
  await stop(server);
  // Growth is judged after the first thousand edits (the heap and WASM memory settle at their working size first).
  const settled = samples.find((s) => s.edits >= Math.min(1000, edits)) ?? samples[0];
  const last = samples[samples.length - 1];
  const span = (last.edits - settled.edits) / 1000;
  const change = (key) => (last[key] === null || settled[key] === null ? null : Math.round((last[key] - settled[key]) * 10) / 10);
  return {
    edits,
    seconds: Math.round(seconds * 10) / 10,
    samples,
    // The live heap (after a full collection) plus WASM memory: what a leak would grow.
    growthMb: change('liveHeapMb') === null ? null : Math.round((change('liveHeapMb') + (change('wasmMb') ?? 0)) * 10) / 10,
    liveHeapGrowthMb: change('liveHeapMb'),
    wasmGrowthMb: change('wasmMb'),
    rssGrowthMb: change('rssMb'),
    growthMbPer1000Edits: span > 0 && change('liveHeapMb') !== null ? Math.round(((change('liveHeapMb') + (change('wasmMb') ?? 0)) / span) * 100) / 100 : null,
  };
}

async function main() {
  const opts = options(process.argv.slice(2));
  if (!fs.existsSync(path.join(root, 'server', 'dist', 'noisewise.js'))) throw new Error('the bundle is missing: run npm run build');
  const { text, typingLine, lineCount } = generateFile(opts.lines);
  const folder = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-bench-lsp-')));
  const file = path.join(folder, 'gauge_layers.py');
  fs.writeFileSync(file, text);
  const uri = pathToFileURL(file).href;
  const typed = 'Mill Weir gauge recalibrated after the March flood; readings before that are biased upward by two centimetres per metre of stage, see the station log for details. '.repeat(2);

  // Push: cold start, then typing into the comment line.
  const push = await startServer(folder, false, opts.cpuProf);
  const firstWait = push.waitDiagnostics((p) => p.uri === uri && p.version === 1);
  await push.connection.sendNotification('textDocument/didOpen', { textDocument: { uri, languageId: 'python', version: 1, text } });
  const first = await firstWait;
  const coldStartMs = first.at - push.t0;
  const findings = first.params.diagnostics.length;
  const pushSamples = [];
  let column = '# Field notes: '.length;
  for (let i = 0; i < opts.edits; i++) {
    const version = i + 2;
    const wait = push.waitDiagnostics((p) => p.uri === uri && p.version === version);
    const t = performance.now();
    await push.connection.sendNotification('textDocument/didChange', {
      textDocument: { uri, version },
      contentChanges: [{ range: { start: { line: typingLine, character: column }, end: { line: typingLine, character: column } }, text: typed[i % typed.length] }],
    });
    await wait;
    pushSamples.push(performance.now() - t);
    column++;
  }
  // Typing code into a function body in the middle of the file: an assignment typed character by character (every
  // state in between is what the analyser sees, half-typed names and open brackets included).
  const codeSamples = [];
  const statement = 'drift = torch.log(stage.abs() + 1e-6) * 0.02 + stage.mean(dim=0, keepdim=True) - stage.std() / 10; ';
  column = '    '.length;
  for (let i = 0; i < opts.edits; i++) {
    const version = opts.edits + i + 2;
    const wait = push.waitDiagnostics((p) => p.uri === uri && p.version === version);
    const t = performance.now();
    await push.connection.sendNotification('textDocument/didChange', {
      textDocument: { uri, version },
      contentChanges: [{ range: { start: { line: typingLine + 3, character: column }, end: { line: typingLine + 3, character: column } }, text: statement[i % statement.length] }],
    });
    await wait;
    codeSamples.push(performance.now() - t);
    column++;
  }
  await stop(push);

  // Pull: the same typing, each edit followed by a document diagnostic request.
  const pull = await startServer(folder, true, opts.cpuProf);
  await pull.connection.sendNotification('textDocument/didOpen', { textDocument: { uri, languageId: 'python', version: 1, text } });
  const pullFirstStart = performance.now();
  const firstPull = await pull.connection.sendRequest('textDocument/diagnostic', { textDocument: { uri } });
  const pullColdStartMs = performance.now() - pull.t0;
  const firstPullMs = performance.now() - pullFirstStart;
  const pullSamples = [];
  column = '# Field notes: '.length;
  for (let i = 0; i < opts.edits; i++) {
    const t = performance.now();
    await pull.connection.sendNotification('textDocument/didChange', {
      textDocument: { uri, version: i + 2 },
      contentChanges: [{ range: { start: { line: typingLine, character: column }, end: { line: typingLine, character: column } }, text: typed[i % typed.length] }],
    });
    await pull.connection.sendRequest('textDocument/diagnostic', { textDocument: { uri } });
    pullSamples.push(performance.now() - t);
    column++;
  }
  await stop(pull);

  // Memory over many edits: a character typed and deleted again, alternately (the text returns to the same two
  // states, so any lasting growth is a leak: syntax trees or parsers not freed in WASM memory, caches that keep every
  // version). Edits come in bursts of ten, each burst waited for, like fast typing. The server's resident set size is
  // read from /proc after every thousand edits.
  const memory = opts.memoryEdits > 0 && fs.existsSync('/proc/self/status') ? await memoryOverEdits(folder, uri, text, typingLine, opts.memoryEdits) : null;
  fs.rmSync(folder, { recursive: true, force: true });

  const result = {
    tool: 'noisewise server --stdio',
    node: process.version,
    cpus: os.cpus().length,
    file: { lines: lineCount, bytes: Buffer.byteLength(text), findings, pulledFindings: firstPull.items?.length ?? null },
    coldStart: { firstDiagnosticsMs: Math.round(coldStartMs * 10) / 10, pullFirstDiagnosticsMs: Math.round(pullColdStartMs * 10) / 10, firstPullRequestMs: Math.round(firstPullMs * 10) / 10 },
    editToDiagnostics: { edits: opts.edits, kind: 'one character typed into a comment line in the middle of the file, sequentially', push: summary(pushSamples), pull: summary(pullSamples), pushTypingCode: summary(codeSamples) },
    memoryOverEdits: memory,
  };
  process.stdout.write(JSON.stringify(result, null, 2) + '\n');
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  main().catch((error) => {
    process.stderr.write(`bench-lsp: ${error?.stack ?? error}\n`);
    process.exit(1);
  });
}
