// The per-file analysis budget: a rule that takes too long is stopped (its findings so far kept, the other rules
// finishing), all rules stop when the file's time is up, and one note says so in every output: the engine's report,
// the CLI's stderr, JSON and SARIF, and an information diagnostic in the editor. A fake clock makes the engine tests
// exact; the CLI and the server read NOISEWISE_FILE_BUDGET_MS.
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { allRules, type RegisteredRule } from '../../rules/index';
import { defineRule } from '../../server/src/engine/api';
import { Deadline } from '../../server/src/engine/budget';
import { checkFile, getParser } from '../../server/src/engine/check';
import { Workspace } from '../../server/src/semantic/workspace';
import { BIN, requireBundle } from '../helpers/cli-run';
import { startSession, tempWorkspace, uriOf } from '../lsp/lsp-client';
import { recordCount } from './fixtures';
import { unconstrainedStdModule } from '../helpers/snippets';

const FLAGGED = [
  unconstrainedStdModule('GaugeLayer'),
  'def step(model, x):',
  '    return model(x).sum()',
  '',
].join('\n');

/** The fake clock: only the stalling rules move it, one millisecond per turn of their loop. */
let clock = 0;
const now = (): number => clock;

/** A test rule: reports the first call it sees, then loops forever on the call at `stallLine` (1-based). */
function stallingRule(id: string, options: { stallLine: number; viaQueries: boolean }): RegisteredRule {
  return {
    ...defineRule({
      meta: { id, title: 'A rule that never finishes, registered only by this test', family: 'evaluation', defaultSeverity: 'warning', status: { stage: 'experimental', since: '0.1.0' }, fix: 'none', messages: { seen: 'seen' }, settings: [] },
      create(context) {
        let reported = false;
        return {
          call(node) {
            if (!reported) {
              context.report({ node, messageId: 'seen' });
              reported = true;
            }
            const line = node.file.text.slice(0, node.start).split('\n').length;
            if (line < options.stallLine) return;
            // Forever: either asking queries (which check the budget) or checking it directly.
            for (;;) {
              clock++;
              if (options.viaQueries) context.sem.typeOf(node);
              else context.checkBudget();
            }
          },
        };
      },
    }),
    doc: `# ${id}\n`,
  };
}

async function check(text: string, budgetMs: number, now: () => number) {
  const parser = await getParser();
  const root = path.resolve('/virtual/budget');
  const workspace = new Workspace(root, () => parser);
  const absPath = path.join(root, 'gauge.py');
  workspace.setFile({ path: 'gauge.py', absPath, text });
  return { report: checkFile(workspace, absPath, { severity: {}, datasetSizeNames: [] }, undefined, { budgetMs, now }), workspace, absPath };
}

describe('the engine', () => {
  const added: RegisteredRule[] = [];
  afterAll(() => {
    for (const rule of added) allRules.splice(allRules.indexOf(rule), 1);
  });

  it('stops a rule that spends its budget, keeps what it reported, and lets the other rules finish', async () => {
    const rule = stallingRule('stall-direct', { stallLine: 11, viaQueries: false });
    added.push(rule);
    allRules.push(rule);
    const { report } = await check(FLAGGED, 1000, now);
    allRules.splice(allRules.indexOf(rule), 1);
    expect(report.findings.filter((f) => f.rule === 'stall-direct')).toHaveLength(1);
    expect(report.findings.filter((f) => f.rule === 'unconstrained-std')).toHaveLength(1);
    expect(report.notes).toEqual([
      { level: 'warning', kind: 'budget', message: 'analysis cut short: rule stall-direct at line 11 stopped after the time budget of 1 s per rule; findings later in the file may be missing' },
    ]);
  });

  it('stops a rule that only asks semantic queries (they check the budget themselves)', async () => {
    const rule = stallingRule('stall-queries', { stallLine: 1, viaQueries: true });
    allRules.push(rule);
    try {
      const { report } = await check(FLAGGED, 1000, now);
      expect(report.notes.map((n) => n.kind)).toEqual(['budget']);
      expect(report.notes[0]!.message).toMatch(/^analysis cut short: rule stall-queries at line \d+ stopped/);
      expect(report.findings.filter((f) => f.rule === 'unconstrained-std')).toHaveLength(1);
    } finally {
      allRules.splice(allRules.indexOf(rule), 1);
    }
  });

  it('stops every rule when the file as a whole runs out of time, and a later check starts from clean memo tables', async () => {
    const rules = [stallingRule('stall-a', { stallLine: 1, viaQueries: true }), stallingRule('stall-b', { stallLine: 1, viaQueries: false })];
    allRules.push(...rules);
    try {
      const { report, workspace, absPath } = await check(FLAGGED, 1000, now);
      expect(report.notes).toHaveLength(1);
      expect(report.notes[0]!.message).toBe(
        "analysis cut short: rules stall-a at line 7, stall-b at line 7 stopped after the time budget of 1 s per rule; every rule stopped at line 7 after the file's time limit of 1.5 s; findings later in the file may be missing",
      );
      // Once the limit passed, nothing else ran; the memo tables of interrupted queries were dropped.
      expect(workspace.memo.size).toBe(0);
      for (const rule of rules) allRules.splice(allRules.indexOf(rule), 1);
      const again = checkFile(workspace, absPath, { severity: {}, datasetSizeNames: [] });
      const fresh = await check(FLAGGED, 30_000, () => performance.now());
      expect(JSON.stringify(again.findings)).toBe(JSON.stringify(fresh.report.findings));
      expect(again.notes).toEqual([]);
    } finally {
      for (const rule of rules) if (allRules.includes(rule)) allRules.splice(allRules.indexOf(rule), 1);
    }
  });

  it('bounds the whole file at one and a half budgets', () => {
    let t = 0;
    const deadline = new Deadline(100, () => t);
    deadline.enter('a');
    t = 90;
    deadline.leave();
    expect(deadline.ruleSpent('a')).toBe(false);
    deadline.enter('b');
    t = 160;
    deadline.leave();
    expect(deadline.fileSpent()).toBe(true);
    expect(() => deadline.check()).toThrow(/time for this file is spent/);
  });
});

describe('the CLI and the server', () => {
  let root: string;
  beforeAll(() => {
    requireBundle();
    root = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-budget-')));
    fs.writeFileSync(path.join(root, 'gauge.py'), FLAGGED);
  });
  afterAll(() => fs.rmSync(root, { recursive: true, force: true }));

  const tiny = { NOISEWISE_FILE_BUDGET_MS: '0.001' };
  const cli = (args: string[]) => spawnSync(process.execPath, [BIN, ...args], { cwd: root, encoding: 'utf8', env: { ...process.env, NO_COLOR: '1', ...tiny } });

  it('prints the note on stderr, in JSON and in SARIF, and does not call it an error', () => {
    const text = cli(['check', '.']);
    expect(text.status, text.stderr).not.toBe(2);
    expect(text.stderr).toMatch(/^gauge\.py: budget: analysis cut short: /m);
    const json = JSON.parse(cli(['check', '.', '--format', 'json']).stdout) as { notes: { path: string; level: string; message: string }[] };
    expect(json.notes).toEqual([{ path: 'gauge.py', level: 'warning', message: expect.stringMatching(/^analysis cut short: .*findings later in the file may be missing$/) as unknown as string }]);
    const sarif = JSON.parse(cli(['check', '.', '--format', 'sarif']).stdout) as { runs: { invocations: { executionSuccessful: boolean; toolExecutionNotifications: { properties: { kind: string } }[] }[] }[] };
    const invocation = sarif.runs[0]!.invocations[0]!;
    expect(invocation.toolExecutionNotifications.map((n) => n.properties.kind)).toEqual(['budget']);
    expect(invocation.executionSuccessful).toBe(true);
  });

  it('shows an information diagnostic at the top of the file in the editor', async () => {
    const workspace = tempWorkspace({ 'gauge.py': FLAGGED });
    process.env.NOISEWISE_FILE_BUDGET_MS = tiny.NOISEWISE_FILE_BUDGET_MS;
    let session: Awaited<ReturnType<typeof startSession>>;
    try {
      session = await startSession({ root: workspace, initializationOptions: { indexWorkspace: false } });
    } finally {
      delete process.env.NOISEWISE_FILE_BUDGET_MS;
    }
    try {
      const uri = uriOf(path.join(workspace, 'gauge.py'));
      session.open(uri, FLAGGED, 1);
      const published = await session.diagnosticsFor(uri, { version: 1 });
      const note = published.diagnostics.find((d) => d.code === 'noisewise');
      expect(note).toMatchObject({ severity: 3, source: 'noisewise', range: { start: { line: 0, character: 0 }, end: { line: 0, character: 0 } } });
      expect(String(note!.message)).toMatch(/^noisewise: analysis cut short: /);
      await session.waitFor('the note in the log', () => session.logs.find((l) => /gauge\.py: analysis cut short/.test(l.message)));
    } finally {
      await session.stop();
    }
    recordCount('budget scenarios', 6);
  });
});
