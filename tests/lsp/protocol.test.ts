// Protocol tests: `noisewise server --stdio` as a child process driven by a real JSON-RPC client — open, edit,
// diagnostics, hover figures, quick fixes and fix-all applied, the allow comment, configuration changes, malformed and
// stale messages, shutdown and exit, and a stdout that carries nothing but protocol frames.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CodeAction, Diagnostic, Hover, TextDocumentEdit } from 'vscode-languageserver-protocol';
import { applyLspEdits, editorCapabilities, type LspSession, type PlainEdit, plainEdits, REPO, startSession, tempWorkspace, textInRange, uriOf } from './lsp-client';

/** A stage-forecast layer whose σ is trainable and used raw (the rule's own fix case, so the fixed text is known). */
const FIX_CASE = path.join(REPO, 'rules', 'unconstrained-std', 'cases', 'fix-basic.py');
const FIX_CASE_FIXED = path.join(REPO, 'rules', 'unconstrained-std', 'cases', 'fix-basic.fixed.py');

function unconstrained(diagnostics: readonly Diagnostic[]): Diagnostic[] {
  return diagnostics.filter((d) => d.code === 'unconstrained-std');
}

function editsFor(action: CodeAction, uri: string): PlainEdit[] {
  const changes = (action.edit?.documentChanges ?? []) as TextDocumentEdit[];
  return plainEdits(changes.filter((c) => c.textDocument.uri === uri).flatMap((c) => c.edits));
}

describe('a Python document in a workspace folder', () => {
  let session: LspSession;
  let root: string;
  let file: string;
  let uri: string;
  let text: string;
  let version = 1;

  beforeAll(async () => {
    text = fs.readFileSync(FIX_CASE, 'utf8');
    root = tempWorkspace({ 'stage/layers.py': text });
    file = path.join(root, 'stage', 'layers.py');
    uri = uriOf(file);
    session = await startSession({ root });
    session.open(uri, text, version);
  });

  afterAll(async () => {
    await session?.stop();
  });

  it('pushes diagnostics with source, rule id, rule page link, severity and the declaration as related information', async () => {
    const published = await session.diagnosticsFor(uri, { version: 1 });
    const found = unconstrained(published.diagnostics);
    expect(found.length).toBeGreaterThanOrEqual(2);
    for (const d of found) {
      expect(d.source).toBe('noisewise');
      expect(d.severity).toBe(2); // warning: the rule's default severity
      expect(textInRange(text, d.range)).toBe('self.w_sigma');
      const page = fileURLToPath(d.codeDescription!.href);
      expect(fs.readFileSync(page, 'utf8').split('\n')[0]).toBe('# unconstrained-std: Trainable standard deviation without a positivity transform');
      const related = d.relatedInformation![0]!;
      expect(related.location.uri).toBe(uri);
      expect(textInRange(text, related.location.range)).toBe('nn.Parameter(torch.full((n_out, n_in), 0.1))');
    }
  });

  it('moves the diagnostics with an incremental edit and re-checks at the new version', async () => {
    const before = unconstrained((await session.diagnosticsFor(uri, { version: 1 })).diagnostics);
    version++;
    const insert = '# Gauge-level layer of the river-stage net.\n';
    session.change(uri, version, [{ range: { start: { line: 0, character: 0 }, end: { line: 0, character: 0 } }, text: insert }]);
    text = insert + text;
    const after = unconstrained((await session.diagnosticsFor(uri, { version })).diagnostics);
    expect(after.map((d) => d.range.start.line)).toEqual(before.map((d) => d.range.start.line + 1));
    for (const d of after) expect(textInRange(text, d.range)).toBe('self.w_sigma');
  });

  it('hovers a finding with the figures computed for this code and the page link', async () => {
    const d = unconstrained((await session.diagnosticsFor(uri, { version })).diagnostics)[0]!;
    const hover = (await session.connection.sendRequest('textDocument/hover', { textDocument: { uri }, position: d.range.start })) as Hover;
    const value = (hover.contents as { kind: string; value: string }).value;
    expect((hover.contents as { kind: string }).kind).toBe('markdown');
    expect(value).toContain('`unconstrained-std`');
    // The initial σ in the code is 0.1; the figures are log σ₀ and softplus⁻¹(σ₀) = log(exp(σ₀) − 1).
    // Check values from a general library (JavaScript's Math.log / Math.exp), rounded as the hover prints them.
    expect(value).toMatch(/\| initial σ \| 0\.1 \|/);
    expect(value).toContain(`| ${Math.log(0.1).toFixed(3)} |`);
    expect(value).toContain(`| ${Math.log(Math.exp(0.1) - 1).toFixed(3)} |`);
    expect(value).toContain(`(${d.codeDescription!.href})`);
    expect(hover.range).toEqual(d.range);
  });

  it('sends plain text to a client that does not render Markdown', async () => {
    const plainRoot = tempWorkspace({ 'layers.py': fs.readFileSync(FIX_CASE, 'utf8') });
    const plainUri = uriOf(path.join(plainRoot, 'layers.py'));
    const plain = await startSession({ root: plainRoot, capabilities: editorCapabilities({ markdown: false }) });
    try {
      plain.open(plainUri, fs.readFileSync(FIX_CASE, 'utf8'));
      const d = unconstrained((await plain.diagnosticsFor(plainUri, { version: 1 })).diagnostics)[0]!;
      const hover = (await plain.connection.sendRequest('textDocument/hover', { textDocument: { uri: plainUri }, position: d.range.start })) as Hover;
      const contents = hover.contents as { kind: string; value: string };
      expect(contents.kind).toBe('plaintext');
      // Check value from a general library (JavaScript's Math.log), rounded as the figure is printed.
      expect(contents.value).toContain(`log σ₀ (initial value for the exp fix) = ${Math.log(0.1).toFixed(3)}`);
      expect(contents.value).not.toContain('|---|');
    } finally {
      await plain.stop();
    }
  });

  it('answers a hover away from any finding with null', async () => {
    const hover = await session.connection.sendRequest('textDocument/hover', { textDocument: { uri }, position: { line: 1, character: 0 } });
    expect(hover).toBeNull();
  });

  it('offers the fixes as quick fixes (the safe one preferred, the review one labelled) and an allow action', async () => {
    const d = unconstrained((await session.diagnosticsFor(uri, { version })).diagnostics)[0]!;
    const actions = (await session.connection.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: d.range, context: { diagnostics: [d] } })) as CodeAction[];
    const titles = actions.map((a) => a.title);
    expect(actions.every((a) => a.kind === 'quickfix')).toBe(true);
    expect(actions.filter((a) => a.isPreferred).map((a) => a.title)).toEqual(['Store log w_sigma as `log_w_sigma` and use `.exp()`']);
    expect(titles).toContain('Store ρ as `w_sigma_rho` and use softplus(ρ) (review: changes how the model trains)');
    expect(titles).toContain('Allow unconstrained-std here (then write the reason after the inserted comment)');
    expect(actions[0]!.diagnostics).toEqual([d]);
    for (const a of actions) expect((a.edit!.documentChanges as TextDocumentEdit[])[0]!.textDocument).toEqual({ uri, version });
  });

  it('applies the preferred quick fix and the finding goes away', async () => {
    const d = unconstrained((await session.diagnosticsFor(uri, { version })).diagnostics)[0]!;
    const actions = (await session.connection.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: d.range, context: { diagnostics: [d] } })) as CodeAction[];
    const preferred = actions.find((a) => a.isPreferred)!;
    const edits = editsFor(preferred, uri);
    const fixed = applyLspEdits(text, edits);
    version++;
    // Send the edits as the editor would: incremental changes, last one first so earlier ranges stay valid.
    const ordered = [...edits].sort((a, b) => b.range.start.line - a.range.start.line || b.range.start.character - a.range.start.character);
    session.change(uri, version, ordered.map((e) => ({ range: e.range, text: e.newText })));
    text = fixed;
    const after = await session.diagnosticsFor(uri, { version });
    expect(unconstrained(after.diagnostics)).toEqual([]);
    expect(text).toContain('self.log_w_sigma = nn.Parameter(torch.full((n_out, n_in), -2.302585093))');
  });
});

describe('fix all', () => {
  it('applies every safe fix of the document through source.fixAll.noisewise, like --fix', async () => {
    const text = fs.readFileSync(FIX_CASE, 'utf8');
    const root = tempWorkspace({ 'layers.py': text });
    const uri = uriOf(path.join(root, 'layers.py'));
    const session = await startSession({ root });
    try {
      session.open(uri, text);
      await session.diagnosticsFor(uri, { version: 1 });
      const whole = { start: { line: 0, character: 0 }, end: { line: text.split('\n').length, character: 0 } };
      const actions = (await session.connection.sendRequest('textDocument/codeAction', {
        textDocument: { uri },
        range: whole,
        context: { diagnostics: [], only: ['source.fixAll'] },
      })) as CodeAction[];
      expect(actions.map((a) => a.kind)).toEqual(['source.fixAll.noisewise']);
      const fixed = applyLspEdits(text, editsFor(actions[0]!, uri));
      expect(fixed).toBe(fs.readFileSync(FIX_CASE_FIXED, 'utf8'));
      session.change(uri, 2, [{ text: fixed }]);
      expect(unconstrained((await session.diagnosticsFor(uri, { version: 2 })).diagnostics)).toEqual([]);
      // Nothing left to fix: no action.
      const again = await session.connection.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: whole, context: { diagnostics: [], only: ['source.fixAll.noisewise'] } });
      expect(again).toEqual([]);
    } finally {
      await session.stop();
    }
  });
});

describe('allow this finding here', () => {
  it('inserts the suppression comment without a reason, so unexplained-allow reports until one is written', async () => {
    const text = fs.readFileSync(FIX_CASE, 'utf8');
    const root = tempWorkspace({ 'layers.py': text });
    const uri = uriOf(path.join(root, 'layers.py'));
    const session = await startSession({ root });
    try {
      session.open(uri, text);
      const first = unconstrained((await session.diagnosticsFor(uri, { version: 1 })).diagnostics)[0]!;
      const actions = (await session.connection.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: first.range, context: { diagnostics: [first] } })) as CodeAction[];
      const allow = actions.find((a) => a.title.startsWith('Allow unconstrained-std here'))!;
      const allowed = applyLspEdits(text, editsFor(allow, uri));
      const line = allowed.split('\n')[first.range.start.line]!;
      expect(line).toBe('        w = self.w_mu + self.w_sigma * torch.randn_like(self.w_mu)  # noisewise: allow[unconstrained-std]');
      session.change(uri, 2, [{ text: allowed }]);
      const after = (await session.diagnosticsFor(uri, { version: 2 })).diagnostics;
      expect(unconstrained(after).map((d) => d.range.start.line)).not.toContain(first.range.start.line);
      const unexplained = after.filter((d) => d.code === 'unexplained-allow');
      expect(unexplained.map((d) => d.range.start.line)).toEqual([first.range.start.line]);
      // Typing a reason after the bracket silences unexplained-allow.
      const reasoned = allowed.replace('# noisewise: allow[unconstrained-std]', '# noisewise: allow[unconstrained-std] sigma is clamped by the caller');
      session.change(uri, 3, [{ text: reasoned }]);
      const final = (await session.diagnosticsFor(uri, { version: 3 })).diagnostics;
      expect(final.filter((d) => d.code === 'unexplained-allow')).toEqual([]);
    } finally {
      await session.stop();
    }
  });

  it('tags a suppression comment that suppresses nothing as unnecessary', async () => {
    const text = 'import torch\n\nrain = torch.zeros(24)  # noisewise: allow[no-such-rule] gauge offline in March\n';
    const root = tempWorkspace({ 'rain.py': text });
    const uri = uriOf(path.join(root, 'rain.py'));
    const session = await startSession({ root });
    try {
      session.open(uri, text);
      const d = (await session.diagnosticsFor(uri, { version: 1 })).diagnostics.find((x) => x.code === 'unexplained-allow')!;
      expect(d.tags).toEqual([1]);
      expect(textInRange(text, d.range)).toBe('# noisewise: allow[no-such-rule] gauge offline in March');
    } finally {
      await session.stop();
    }
  });

  it('adds the rule to a suppression comment that already covers the line', async () => {
    const text = fs.readFileSync(FIX_CASE, 'utf8').replace(
      '        w = self.w_mu + self.w_sigma * torch.randn_like(self.w_mu)',
      '        # noisewise: allow[unexplained-allow] kept for the gauge calibration run\n        w = self.w_mu + self.w_sigma * torch.randn_like(self.w_mu)',
    );
    const root = tempWorkspace({ 'layers.py': text });
    const uri = uriOf(path.join(root, 'layers.py'));
    const session = await startSession({ root });
    try {
      session.open(uri, text);
      const lineOfUse = text.split('\n').findIndex((l) => l.includes('w = self.w_mu + self.w_sigma'));
      const finding = unconstrained((await session.diagnosticsFor(uri, { version: 1 })).diagnostics).find((d) => d.range.start.line === lineOfUse)!;
      const actions = (await session.connection.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: finding.range, context: { diagnostics: [finding] } })) as CodeAction[];
      const allow = actions.find((a) => a.title.startsWith('Allow unconstrained-std here'))!;
      const allowed = applyLspEdits(text, editsFor(allow, uri));
      expect(allowed.split('\n')[lineOfUse - 1]).toBe('        # noisewise: allow[unexplained-allow, unconstrained-std] kept for the gauge calibration run');
    } finally {
      await session.stop();
    }
  });
});

describe('configuration', () => {
  it('reads [tool.noisewise] from pyproject.toml and lets noisewise.* settings override it, re-checking on change', async () => {
    const text = fs.readFileSync(FIX_CASE, 'utf8');
    const root = tempWorkspace({ 'pyproject.toml': '[tool.noisewise]\nseverity = { unconstrained-std = "error" }\n', 'layers.py': text });
    const uri = uriOf(path.join(root, 'layers.py'));
    const session = await startSession({ root });
    try {
      session.open(uri, text);
      const first = unconstrained((await session.diagnosticsFor(uri, { version: 1 })).diagnostics);
      expect(first.length).toBeGreaterThan(0);
      expect(first.every((d) => d.severity === 1)).toBe(true);
      session.settings = { severity: { 'unconstrained-std': 'off' } };
      let since = session.pushed.length;
      void session.connection.sendNotification('workspace/didChangeConfiguration', { settings: null });
      const off = await session.waitFor('diagnostics without unconstrained-std', () => {
        const p = session.pushed.slice(since).find((x) => x.uri === uri);
        return p && unconstrained(p.diagnostics).length === 0 ? p : undefined;
      });
      expect(off.version).toBe(1);
      session.settings = { severity: { 'unconstrained-std': 'hint' } };
      since = session.pushed.length;
      void session.connection.sendNotification('workspace/didChangeConfiguration', { settings: null });
      const hint = await session.waitFor('hint diagnostics', () => {
        const p = session.pushed.slice(since).find((x) => x.uri === uri);
        return p && unconstrained(p.diagnostics).length > 0 ? p : undefined;
      });
      expect(unconstrained(hint.diagnostics).every((d) => d.severity === 4)).toBe(true);
    } finally {
      await session.stop();
    }
  });

  it('warns about a broken pyproject.toml once and keeps checking with the editor settings', async () => {
    const text = fs.readFileSync(FIX_CASE, 'utf8');
    const root = tempWorkspace({ 'pyproject.toml': '[tool.noisewise]\nseverity = { unconstrained-std = "loud" }\n', 'layers.py': text });
    const uri = uriOf(path.join(root, 'layers.py'));
    const session = await startSession({ root, settings: { severity: { 'unconstrained-std': 'error' } } });
    try {
      session.open(uri, text);
      const d = unconstrained((await session.diagnosticsFor(uri, { version: 1 })).diagnostics);
      expect(d.length).toBeGreaterThan(0);
      expect(d.every((x) => x.severity === 1)).toBe(true);
      const shown = await session.waitFor('a warning about pyproject.toml', () => session.shownMessages.find((m) => m.includes('pyproject.toml')));
      expect(shown).toContain('unknown severity "loud"');
      expect(session.shownMessages.filter((m) => m.includes('pyproject.toml'))).toHaveLength(1);
    } finally {
      await session.stop();
    }
  });

  it('logs invalid settings and keeps checking with the valid ones', async () => {
    const text = fs.readFileSync(FIX_CASE, 'utf8');
    const root = tempWorkspace({ 'layers.py': text });
    const uri = uriOf(path.join(root, 'layers.py'));
    const session = await startSession({ root, settings: { severity: { 'unconstrained-std': 'error', 'no-such-rule': 'off' }, exclude: 7 } });
    try {
      session.open(uri, text);
      const d = unconstrained((await session.diagnosticsFor(uri, { version: 1 })).diagnostics);
      expect(d.every((x) => x.severity === 1)).toBe(true);
      expect(session.logs.map((l) => l.message).join('\n')).toContain('unknown rule id "no-such-rule" is ignored');
    } finally {
      await session.stop();
    }
  });
});

describe('robustness', () => {
  it('survives malformed requests, unknown documents and stale versions, and keeps answering', async () => {
    const text = fs.readFileSync(FIX_CASE, 'utf8');
    const root = tempWorkspace({ 'layers.py': text });
    const uri = uriOf(path.join(root, 'layers.py'));
    const session = await startSession({ root });
    try {
      session.open(uri, text, 5);
      await session.diagnosticsFor(uri, { version: 5 });
      // A hover without a document is an error response, not a crash.
      await expect(session.connection.sendRequest('textDocument/hover', { position: { line: 0, character: 0 } })).rejects.toThrow();
      // A method the server does not implement.
      await expect(session.connection.sendRequest('textDocument/noSuchThing', {})).rejects.toMatchObject({ code: -32601 });
      // A change for a document that was never opened, and one older than the open version.
      session.change(uriOf(path.join(root, 'never-opened.py')), 2, [{ text: 'x = 1\n' }]);
      session.change(uri, 3, [{ text: 'x = 1\n' }]);
      await session.waitFor('a log line about the stale change', () => session.logs.find((l) => l.message.includes('older than the open version 5')));
      // A hover on a document nobody opened and that is not on disk.
      expect(await session.connection.sendRequest('textDocument/hover', { textDocument: { uri: 'untitled:Untitled-9' }, position: { line: 0, character: 0 } })).toBeNull();
      // Still alive and still at version 5.
      const d = unconstrained(session.latest(uri)!.diagnostics)[0]!;
      const hover = await session.connection.sendRequest('textDocument/hover', { textDocument: { uri }, position: d.range.start });
      expect(hover).not.toBeNull();
      expect(session.child.exitCode).toBeNull();
    } finally {
      await session.stop();
    }
  });

  it('writes nothing but protocol frames to stdout and exits with 0 after shutdown and exit', async () => {
    const text = fs.readFileSync(FIX_CASE, 'utf8');
    const root = tempWorkspace({ 'layers.py': text, 'broken.py': 'def (:\n  print("unclosed\n' });
    const session = await startSession({ root });
    session.open(uriOf(path.join(root, 'layers.py')), text);
    session.open(uriOf(path.join(root, 'broken.py')), 'def (:\n  print("unclosed\n');
    await session.diagnosticsFor(uriOf(path.join(root, 'broken.py')), { version: 1 });
    await session.waitFor('indexing to finish', () => session.logs.find((l) => l.message.includes('indexing (start-up) finished')));
    expect(await session.stop()).toBe(0);
    const frames = session.stdoutFrames() as { jsonrpc?: string }[];
    expect(frames.length).toBeGreaterThan(3);
    expect(frames.every((f) => f.jsonrpc === '2.0')).toBe(true);
  });

  it('exits when standard input closes without a shutdown', async () => {
    const root = tempWorkspace({ 'a.py': 'x = 1\n' });
    const session = await startSession({ root });
    await session.waitFor('indexing to finish', () => session.logs.find((l) => l.message.includes('indexing (start-up) finished')));
    session.child.stdin!.end();
    expect(await session.exited).toBe(1);
  });

  it('exits when the editor process it was started by dies', async () => {
    const { spawn } = await import('node:child_process');
    const parent = spawn(process.execPath, ['-e', 'setTimeout(() => {}, 60000)'], { stdio: 'ignore' });
    const root = tempWorkspace({ 'a.py': 'x = 1\n' });
    const session = await startSession({ root, args: [`--clientProcessId=${parent.pid}`] });
    try {
      await session.waitFor('indexing to finish', () => session.logs.find((l) => l.message.includes('indexing (start-up) finished')));
      parent.kill('SIGKILL');
      const code = await Promise.race([session.exited, new Promise((resolve) => setTimeout(() => resolve('still running'), 10_000))]);
      expect(code).not.toBe('still running');
    } finally {
      parent.kill('SIGKILL');
      session.child.kill('SIGKILL');
    }
  });

  it('refuses to start without a transport and prints its usage for --help', async () => {
    const { spawnSync } = await import('node:child_process');
    const bin = path.join(REPO, 'server', 'bin', 'noisewise.js');
    const none = spawnSync(process.execPath, [bin, 'server'], { encoding: 'utf8' });
    expect(none.status).toBe(2);
    expect(none.stderr).toContain('--stdio');
    const help = spawnSync(process.execPath, [bin, 'server', '--help'], { encoding: 'utf8' });
    expect(help.status).toBe(0);
    expect(help.stdout).toContain('Usage: noisewise server --stdio');
  });
});

describe('capabilities', () => {
  it('announces incremental sync, notebooks, hover, quick fixes, fix-all and the check command; pull only to pull clients', async () => {
    const root = tempWorkspace({ 'a.py': 'x = 1\n' });
    const push = await startSession({ root });
    const pull = await startSession({ root, capabilities: editorCapabilities({ pull: true }) });
    try {
      const caps = push.initializeResult.capabilities;
      expect(caps.textDocumentSync).toEqual({ openClose: true, change: 2 });
      expect(caps.notebookDocumentSync).toEqual({ notebookSelector: [{ notebook: '*', cells: [{ language: 'python' }] }] });
      expect(caps.hoverProvider).toBe(true);
      expect(caps.codeActionProvider).toEqual({ codeActionKinds: ['quickfix', 'source.fixAll.noisewise'], resolveProvider: false });
      expect(caps.executeCommandProvider).toEqual({ commands: ['noisewise.server.checkWorkspace'] });
      expect(caps.diagnosticProvider).toBeUndefined();
      expect(pull.initializeResult.capabilities.diagnosticProvider).toEqual({ identifier: 'noisewise', interFileDependencies: true, workspaceDiagnostics: true });
      expect(push.initializeResult.serverInfo?.name).toBe('noisewise');
      // The file watchers are registered dynamically.
      await push.waitFor('watcher registration', () => push.registrations.find((r) => r.method === 'workspace/didChangeWatchedFiles'));
    } finally {
      await push.stop();
      await pull.stop();
    }
  });
});
