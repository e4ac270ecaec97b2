// End-to-end tests of the built `noisewise` command on temporary copies of fixture folders: every format, exit codes,
// rule selection, configuration, --fix/--diff and damaged inputs; plus a few in-process runs for terminals and races.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { applyPatch } from 'diff';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { allRules } from '../rules/index';
import { runCli } from '../server/src/cli/run';
import type { CliIo } from '../server/src/cli/io';
import { checkSources } from '../server/src/engine/check';
import { clearConfigCache } from '../server/src/engine/config';
import type { CheckInput } from '../server/src/engine/types';
import { addMessyBinaries, copyFixture, removeCopy, requireBundle, runNoisewise } from './helpers/cli-run';

const RULE = 'unconstrained-std';
/** `noisewise check` limited to the rule the fixtures are written for, so that new rules do not change these expectations. */
const CHECK = ['check', '--rule', RULE];
const copies: string[] = [];

function fresh(name: string): string {
  const copy = copyFixture(name);
  copies.push(copy);
  return copy;
}

beforeAll(() => requireBundle());
afterAll(() => {
  for (const copy of copies) removeCopy(copy);
});

interface JsonOut {
  findings: Record<string, unknown>[];
  notes: { path: string; level: string; message: string }[];
  summary: Record<string, unknown>;
}

describe('noisewise check on a small lab', () => {
  let lab: string;
  let text: ReturnType<typeof runNoisewise>;
  let json: ReturnType<typeof runNoisewise>;

  beforeAll(() => {
    lab = fresh('gauge-lab');
    text = runNoisewise([...CHECK], lab);
    json = runNoisewise([...CHECK, '--format', 'json'], lab);
  });

  it('prints one line per finding, figures and a summary, and exits 1 for warnings', () => {
    expect(text.code).toBe(1);
    const findingLines = text.stdout.split('\n').filter((l) => l.includes(`[${RULE}]`));
    expect(findingLines.map((l) => l.split(': warning')[0])).toEqual(['gauges/reparam.py:13:25', 'gauges/stage_net.py:17:27', 'notebooks/pump.ipynb:cell 3:8:27']);
    expect(text.stdout).toMatch(/^ {4}· initial σ: 0\.05$/m);
    expect(text.stdout).toContain('3 findings (3 warnings) in 3 files; 4 files checked; 3 can be fixed with --fix.');
    expect(text.stdout).not.toContain('\u001b[');
    expect(text.stderr).toBe('');
  });

  it('runs every rule by default, these findings included', () => {
    const all = JSON.parse(runNoisewise(['check', '--format', 'json'], lab).stdout) as JsonOut;
    const mine = (JSON.parse(json.stdout) as JsonOut).findings;
    expect(all.findings.filter((f) => f.rule === RULE)).toEqual(mine);
  });

  it('leaves out what pyproject.toml excludes', () => {
    expect(text.stdout).not.toContain('legacy/');
    const legacy = runNoisewise([...CHECK, 'legacy/old_head.py', '--format', 'json'], lab);
    expect((JSON.parse(legacy.stdout) as JsonOut).findings).toHaveLength(1);
  });

  it('writes the JSON contract with paths relative to the working directory', () => {
    expect(json.code).toBe(1);
    const out = JSON.parse(json.stdout) as JsonOut;
    expect(out.findings.map((f) => [f.path, f.line, f.column, f.cell])).toEqual([
      ['gauges/reparam.py', 13, 25, undefined],
      ['gauges/stage_net.py', 17, 27, undefined],
      ['notebooks/pump.ipynb', 8, 27, 3],
    ]);
    expect(out.findings[1]).toMatchObject({ rule: RULE, severity: 'warning', endLine: 17, endColumn: 40, fixable: true });
    expect(typeof out.findings[1]!.message).toBe('string');
    expect(out.notes).toEqual([]);
    expect(out.summary).toMatchObject({ files: 4, findings: 3 });
  });

  it('reports the same paths when run from a parent folder', () => {
    const out = runNoisewise([...CHECK, path.basename(lab), '--format', 'json'], path.dirname(lab));
    expect((JSON.parse(out.stdout) as JsonOut).findings.map((f) => f.path)).toEqual([
      'gauge-lab/gauges/reparam.py',
      'gauge-lab/gauges/stage_net.py',
      'gauge-lab/notebooks/pump.ipynb',
    ]);
  });

  it('writes GitHub workflow commands', () => {
    const out = runNoisewise([...CHECK, '--format', 'github'], lab);
    expect(out.code).toBe(1);
    const lines = out.stdout.trimEnd().split('\n');
    expect(lines[0]).toMatch(/^::warning file=gauges\/reparam\.py,line=13,col=25,endLine=13,endColumn=\d+,title=noisewise unconstrained-std::`w_sd` is trainable/);
    expect(lines[2]).toMatch(/^::warning file=notebooks\/pump\.ipynb,title=noisewise unconstrained-std::cell 3, line 8, column 27: /);
  });

  it('writes SARIF to --output and nothing to standard output', () => {
    const out = runNoisewise([...CHECK, '--format', 'sarif', '--output', 'report.sarif'], lab);
    expect(out.code).toBe(1);
    expect(out.stdout).toBe('');
    const log = JSON.parse(fs.readFileSync(path.join(lab, 'report.sarif'), 'utf8'));
    expect(log.version).toBe('2.1.0');
    expect(log.runs[0].results).toHaveLength(3);
    expect(log.runs[0].results[2].properties.cell).toBe(3);
  });

  it('exits 0 below the fail level, with --exit-zero, and when the rule is skipped', () => {
    expect(runNoisewise([...CHECK, '--fail-on', 'error'], lab).code).toBe(0);
    expect(runNoisewise([...CHECK, '--exit-zero'], lab).code).toBe(0);
    const skipped = runNoisewise(['check', '--skip', RULE, '--format', 'json'], lab);
    const others = (JSON.parse(skipped.stdout) as JsonOut).findings;
    expect(others.filter((f) => f.rule === RULE)).toEqual([]);
    expect(skipped.code).toBe(others.some((f) => f.severity === 'error' || f.severity === 'warning') ? 1 : 0);
    const only = runNoisewise(['check', '--rule', 'unexplained-allow', '--format', 'json'], lab);
    expect((JSON.parse(only.stdout) as JsonOut).findings).toEqual([]);
  });

  it('exits 2 for an unknown rule id and lists the rules', () => {
    const out = runNoisewise(['check', '--rule', 'unconstrained-sd'], lab);
    expect(out.code).toBe(2);
    expect(out.stderr).toContain('--rule: unknown rule "unconstrained-sd"');
    expect(out.stderr).toContain(RULE);
    expect(out.stdout).toBe('');
  });
});

describe('configured severities', () => {
  function labWith(config: string): string {
    const lab = fresh('gauge-lab');
    fs.writeFileSync(path.join(lab, 'pyproject.toml'), `[tool.noisewise]\nexclude = ["legacy/**"]\n${config}`);
    return lab;
  }

  it('raises a rule to error, which --fail-on error then fails on', () => {
    const lab = labWith(`severity = { ${RULE} = "error" }\n`);
    const out = runNoisewise([...CHECK, '--fail-on', 'error', '--format', 'json'], lab);
    expect(out.code).toBe(1);
    expect((JSON.parse(out.stdout) as JsonOut).findings.map((f) => f.severity)).toEqual(['error', 'error', 'error']);
  });

  it('lowers a rule to info, which fails only with --fail-on info', () => {
    const lab = labWith(`severity = { ${RULE} = "info" }\n`);
    const out = runNoisewise([...CHECK], lab);
    expect(out.code).toBe(0);
    expect(out.stdout).toContain(`: info [${RULE}]`);
    expect(runNoisewise([...CHECK, '--fail-on', 'info'], lab).code).toBe(1);
  });

  it('exits 2 with the file and key named for a broken configuration', () => {
    const lab = labWith(`severity = { ${RULE} = "loud" }\n`);
    const out = runNoisewise([...CHECK], lab);
    expect(out.code).toBe(2);
    expect(out.stderr).toContain('configuration error');
    expect(out.stderr).toContain(path.join(lab, 'pyproject.toml'));
    expect(out.stderr).toContain(`tool.noisewise.severity.${RULE}`);
    expect(out.stdout).toBe('');
  });
});

describe('--diff and --fix', () => {
  it('--diff prints patches that --fix would write, writes nothing and exits on what remains', () => {
    const lab = fresh('gauge-lab');
    const before = new Map(['gauges/reparam.py', 'gauges/stage_net.py', 'notebooks/pump.ipynb'].map((p) => [p, fs.readFileSync(path.join(lab, p), 'utf8')]));
    const out = runNoisewise([...CHECK, '--diff'], lab);
    expect(out.code).toBe(0);
    expect(out.stdout).toContain('--- a/gauges/reparam.py\n+++ b/gauges/reparam.py');
    expect(out.stdout).toContain('Would fix 3 findings in 3 files (nothing was written).');
    expect(out.stdout).toContain('No findings would remain; 4 files checked.');
    for (const [p, text] of before) expect(fs.readFileSync(path.join(lab, p), 'utf8')).toBe(text);

    const diffText = out.stdout.slice(0, out.stdout.indexOf('Would fix'));
    const patches = diffText.split(/^(?====)/m).filter((chunk) => chunk.trim() !== '');
    expect(patches).toHaveLength(3);
    const fixed = runNoisewise([...CHECK, '--fix'], lab);
    expect(fixed.code).toBe(0);
    expect(fixed.stdout).toBe('Fixed 3 findings in 3 files.\nNo findings remain; 4 files checked.\n');
    for (const patch of patches) {
      const file = /^\+\+\+ b\/(\S+)/m.exec(patch)![1]!;
      expect(applyPatch(before.get(file)!, patch)).toBe(fs.readFileSync(path.join(lab, file), 'utf8'));
    }
    const again = runNoisewise([...CHECK, '--format', 'json'], lab);
    expect(again.code).toBe(0);
    expect((JSON.parse(again.stdout) as JsonOut).findings).toEqual([]);
  });

  it('--fix keeps notebook cells, byte-order mark, CRLF line endings and file mode', () => {
    const lab = fresh('gauge-lab');
    const reparam = fs.readFileSync(path.join(lab, 'gauges', 'reparam.py'), 'utf8');
    const crlfPath = path.join(lab, 'gauges', 'reparam_win.py');
    fs.writeFileSync(crlfPath, Buffer.concat([Buffer.from([0xef, 0xbb, 0xbf]), Buffer.from(reparam.replace(/\n/g, '\r\n').replace('DischargeLayer', 'DischargeLayerWin'))]));
    fs.chmodSync(crlfPath, 0o640);
    const notebookBefore = JSON.parse(fs.readFileSync(path.join(lab, 'notebooks', 'pump.ipynb'), 'utf8'));
    const out = runNoisewise([...CHECK, '--fix', '--format', 'json'], lab);
    expect(out.code).toBe(0);
    expect((JSON.parse(out.stdout) as JsonOut).summary).toMatchObject({ findings: 0, fixed: 4 });

    const bytes = fs.readFileSync(crlfPath);
    expect([...bytes.subarray(0, 3)]).toEqual([0xef, 0xbb, 0xbf]);
    const crlfText = bytes.subarray(3).toString('utf8');
    expect(crlfText).not.toMatch(/[^\r]\n/);
    expect(crlfText).not.toBe(reparam.replace(/\n/g, '\r\n').replace('DischargeLayer', 'DischargeLayerWin'));
    expect(fs.statSync(crlfPath).mode & 0o777).toBe(0o640);

    const raw = fs.readFileSync(path.join(lab, 'notebooks', 'pump.ipynb'), 'utf8');
    const notebookAfter = JSON.parse(raw);
    expect(raw.endsWith('}\n')).toBe(true);
    expect(raw.split('\n')[1]).toBe(' "cells": [');
    for (const i of [0, 1, 2]) expect(notebookAfter.cells[i]).toEqual(notebookBefore.cells[i]);
    expect(notebookAfter.cells[3].source).not.toEqual(notebookBefore.cells[3].source);
    expect(fs.readdirSync(path.join(lab, 'gauges')).filter((f) => f.includes('.tmp'))).toEqual([]);
  });

  it('exits 2 for --diff with a machine format on standard output', () => {
    const out = runNoisewise([...CHECK, '--diff', '--format', 'json'], fresh('gauge-lab'));
    expect(out.code).toBe(2);
    expect(out.stderr).toContain('--diff prints patches on standard output');
  });
});

describe('a folder with damaged files', () => {
  let messy: string;
  let text: ReturnType<typeof runNoisewise>;

  beforeAll(() => {
    messy = fresh('messy');
    addMessyBinaries(messy);
    text = runNoisewise([...CHECK], messy);
  });

  it('still reports findings in the readable files, including the latin-1 one, and exits 1', () => {
    expect(text.code).toBe(1);
    const lines = text.stdout.split('\n').filter((l) => l.includes(`[${RULE}]`));
    // `débit = self.moy + ` is 27 code points (28 UTF-8 bytes) before `self.ecart`.
    expect(lines.map((l) => l.split(': warning')[0])).toEqual(['broken_syntax.py:11:21', 'debit_latin1.py:14:28']);
  });

  it('explains on standard error what it skipped and why', () => {
    const notes = text.stderr.trimEnd().split('\n');
    expect(notes).toContain('weights_dump.py: skipped: binary file (it contains NUL bytes)');
    expect(notes.some((n) => n.startsWith('broken.ipynb: skipped: not a valid notebook'))).toBe(true);
    expect(notes.some((n) => /^broken_syntax\.py: syntax: /.test(n))).toBe(true);
    // The binary file is not read and the broken notebook is not analysed: three files were checked.
    expect(text.stdout).toContain('2 findings (2 warnings) in 2 files; 3 files checked;');
  });

  it('lists the same notes in JSON and SARIF', () => {
    const json = JSON.parse(runNoisewise([...CHECK, '--format', 'json'], messy).stdout) as JsonOut;
    expect(json.notes.map((n) => [n.path, n.level])).toEqual(expect.arrayContaining([['weights_dump.py', 'warning'], ['broken.ipynb', 'warning']]));
    expect(json.notes.find((n) => n.path === 'weights_dump.py')!.message).toBe('skipped: binary file (it contains NUL bytes)');
    const sarif = JSON.parse(runNoisewise([...CHECK, '--format', 'sarif'], messy).stdout);
    const notifications = sarif.runs[0].invocations[0].toolExecutionNotifications as { message: { text: string } }[];
    expect(notifications.map((n) => n.message.text)).toEqual(expect.arrayContaining(['weights_dump.py: skipped: binary file (it contains NUL bytes)']));
    expect(sarif.runs[0].invocations[0].executionSuccessful).toBe(true);
  });
});

describe('rules, explain, help, version and usage errors', () => {
  const cwd = path.resolve(__dirname);

  it('lists the rules', () => {
    const out = runNoisewise(['rules'], cwd);
    expect(out.code).toBe(0);
    expect(out.stdout.split('\n')[0]).toMatch(/^RULE\s+FAMILY\s+SEVERITY\s+FIX\s+TITLE$/);
    const row = out.stdout.split('\n').find((l) => l.startsWith(RULE))!;
    const meta = allRules.find((r) => r.meta.id === RULE)!.meta;
    expect(row.split(/\s{2,}/)).toEqual([RULE, meta.family, meta.defaultSeverity === 'information' ? 'info' : meta.defaultSeverity, meta.fix, meta.title]);
  });

  it('prints a rule page, and exits 2 with the ids for an unknown rule', () => {
    const out = runNoisewise(['explain', RULE], cwd);
    expect(out.code).toBe(0);
    expect(out.stdout).toBe(allRules.find((r) => r.meta.id === RULE)!.doc.replace(/\n?$/, '\n'));
    const unknown = runNoisewise(['explain', 'nope'], cwd);
    expect(unknown.code).toBe(2);
    expect(unknown.stderr).toContain('unknown rule "nope"');
    for (const rule of allRules) expect(unknown.stderr).toContain(`  ${rule.meta.id}\n`);
  });

  it('prints help and version', () => {
    const help = runNoisewise(['--help'], cwd);
    expect(help.code).toBe(0);
    expect(help.stdout).toContain('Usage: noisewise <command>');
    const version = runNoisewise(['--version'], cwd);
    expect(version.stdout).toMatch(/^noisewise \d+\.\d+\.\d+\n$/);
  });

  it('exits 2 with usage for unknown commands, options and values', () => {
    for (const args of [[], ['frobnicate'], ['check', '--format', 'xml'], ['check', '--colour'], ['check', '--output'], ['check', 'no/such/path']]) {
      const out = runNoisewise(args, cwd);
      expect(out.code, args.join(' ')).toBe(2);
      expect(out.stderr, args.join(' ')).toMatch(/^noisewise: /);
    }
  });
});

/** An in-memory terminal for running the CLI in this process. */
function memoryIo(cwd: string, options: { tty?: boolean; env?: Record<string, string> } = {}) {
  const out: string[] = [];
  const err: string[] = [];
  const io: CliIo = {
    cwd,
    env: options.env ?? {},
    stdout: { write: (t) => void out.push(t), isTTY: options.tty ?? false },
    stderr: { write: (t) => void err.push(t), isTTY: options.tty ?? false },
  };
  return { io, stdout: () => out.join(''), stderr: () => err.join('') };
}

describe('in-process runs with the real engine', () => {
  it('colours a terminal unless NO_COLOR or --no-color says otherwise', async () => {
    const lab = fresh('gauge-lab');
    clearConfigCache();
    const tty = memoryIo(lab, { tty: true });
    expect(await runCli([...CHECK], tty.io, { rules: allRules, checkSources })).toBe(1);
    expect(tty.stdout()).toContain('\u001b[33;1mwarning\u001b[0m');
    const noColor = memoryIo(lab, { tty: true, env: { NO_COLOR: '1' } });
    await runCli([...CHECK], noColor.io, { rules: allRules, checkSources });
    expect(noColor.stdout()).not.toContain('\u001b[');
    const flag = memoryIo(lab, { tty: true });
    await runCli([...CHECK, '--no-color'], flag.io, { rules: allRules, checkSources });
    expect(flag.stdout()).not.toContain('\u001b[');
  });

  it('does not overwrite a file that changed on disk during the check, and reports what is really there', async () => {
    const lab = fresh('gauge-lab');
    clearConfigCache();
    const target = path.join(lab, 'gauges', 'stage_net.py');
    const edited = `${fs.readFileSync(target, 'utf8')}# edited by someone else\n`;
    let calls = 0;
    const racing = async (inputs: CheckInput[], options: Parameters<typeof checkSources>[1]) => {
      calls++;
      if (calls === 1) fs.writeFileSync(target, edited);
      return checkSources(inputs, options);
    };
    const run = memoryIo(lab);
    const code = await runCli([...CHECK, '--fix', '--format', 'json'], run.io, { rules: allRules, checkSources: racing });
    expect(fs.readFileSync(target, 'utf8')).toBe(edited);
    const out = JSON.parse(run.stdout()) as JsonOut;
    expect(out.notes).toContainEqual({ path: 'gauges/stage_net.py', level: 'warning', message: 'not written: the file changed on disk while it was being checked; run again' });
    expect(out.findings.map((f) => f.path)).toEqual(['gauges/stage_net.py']);
    expect(out.summary).toMatchObject({ fixed: 2 });
    expect(code).toBe(1);
  });

  it('shows a progress line on a terminal for a large run and erases it, and never on a pipe', async () => {
    const dir = fresh('messy');
    for (let i = 0; i < 200; i++) fs.writeFileSync(path.join(dir, `gauge_${String(i).padStart(3, '0')}.py`), `station = ${i}\n`);
    clearConfigCache();
    const quick = async (inputs: CheckInput[]) => inputs.map((i) => ({ path: i.path, absPath: i.absPath, kind: 'python' as const, text: i.text, notebook: null, findings: [], notes: [] }));
    const tty = memoryIo(dir, { tty: true });
    expect(await runCli(['check'], tty.io, { rules: allRules, checkSources: quick })).toBe(0);
    expect(tty.stderr()).toMatch(/^\r\u001b\[Knoisewise: checking 203 files…\r\u001b\[K/);
    const pipe = memoryIo(dir);
    await runCli(['check'], pipe.io, { rules: allRules, checkSources: quick });
    expect(pipe.stderr()).not.toContain('checking');
  });

  it('exits 2 when the engine fails, with the error on standard error', async () => {
    const lab = fresh('gauge-lab');
    clearConfigCache();
    const run = memoryIo(lab);
    const failing = async (): Promise<never> => {
      throw new Error('parser exploded');
    };
    expect(await runCli(['check'], run.io, { rules: allRules, checkSources: failing })).toBe(2);
    expect(run.stderr()).toMatch(/^noisewise: internal error: Error: parser exploded/);
  });
});
