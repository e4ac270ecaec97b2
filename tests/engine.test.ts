// The engine end to end on real parses and real rules: suppressions, configured severities, rule selection, containment of
// failing rules, ordering and de-duplication of findings, broken inputs, and the range invariant over every fixture.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { allRules, type RegisteredRule } from '../rules/index';
import type { RuleContext, RuleListeners } from '../server/src/engine/api';
import { checkFile, checkSources, enabledRules, getParser } from '../server/src/engine/check';
import type { ConfiguredSeverity, Severity } from '../server/src/engine/finding';
import type { FileReport, RuleSelection } from '../server/src/engine/types';
import { PythonDocument } from '../server/src/parse/document';
import { Workspace } from '../server/src/semantic/workspace';
import { checkPath } from './helpers/engine';
import { lineOf, notebookJson, VIRTUAL_ROOT } from './helpers/workspace';

/** A pump-bearing noise layer whose `self.sigma` (line 12) is a raw trainable standard deviation. */
function pumpSource(options: { aboveForward?: string; trailing?: string; footer?: string } = {}): string {
  const lines = [
    '# Pump-bearing vibration classifier: one noisy layer.',
    'import torch',
    'from torch import nn',
    '',
    '',
    'class BearingNoise(nn.Module):',
    '    def __init__(self):',
    '        super().__init__()',
    '        self.sigma = nn.Parameter(torch.ones(3))',
    '',
    '    def forward(self, x):',
    ...(options.aboveForward !== undefined ? [options.aboveForward] : []),
    `        return x + self.sigma * torch.randn_like(x)${options.trailing ?? ''}`,
    ...(options.footer !== undefined ? [options.footer] : []),
    '',
  ];
  return lines.join('\n');
}

/** Checks in-memory files as one workspace with the given severities and selection. */
async function check(files: Record<string, string>, options: { severity?: Record<string, ConfiguredSeverity>; rules?: RuleSelection } = {}): Promise<FileReport[]> {
  return checkSources(
    Object.entries(files).map(([p, text]) => ({ path: p, absPath: path.join(VIRTUAL_ROOT, p), text })),
    { workspaceRoot: VIRTUAL_ROOT, settingsFor: () => ({ severity: options.severity ?? {}, datasetSizeNames: [] }), rules: options.rules },
  );
}

/** The registered rules these tests are about; findings of rules added to the registry later are left out of `summary`. */
const RULES_UNDER_TEST = new Set(['unconstrained-std', 'unexplained-allow']);

/** Findings of one report (of the rules under test and of `test-*` rules) as `rule:severity:line:messageId:text`. */
function summary(report: FileReport): string[] {
  return report.findings.filter((f) => RULES_UNDER_TEST.has(f.rule) || f.rule.startsWith('test-')).map((f) => `${f.rule}:${f.severity}:${lineOf(report.text, f.start)}:${f.messageId}:${report.text.slice(f.start, f.end)}`);
}

const FLAGGED = 'unconstrained-std:warning:12:noise:self.sigma';

describe('suppression comments', () => {
  it('reports the unsuppressed finding', async () => {
    const [report] = await check({ 'pump.py': pumpSource() });
    expect(summary(report!)).toEqual([FLAGGED]);
    expect(report!.notes).toEqual([]);
  });

  it('hides a finding with a reasoned allow on its line or alone on the line above', async () => {
    const [onLine] = await check({ 'pump.py': pumpSource({ trailing: '  # noisewise: allow[unconstrained-std] sigma is clamped by the caller' }) });
    expect(summary(onLine!)).toEqual([]);
    const [above] = await check({ 'pump.py': pumpSource({ aboveForward: '        # noisewise: allow[unconstrained-std] sigma is clamped by the caller' }) });
    expect(summary(above!)).toEqual([]);
    const [listed] = await check({ 'pump.py': pumpSource({ trailing: '  # noisewise: allow[unexplained-allow, unconstrained-std] sigma is clamped' }) });
    expect(summary(listed!)).toEqual([]);
  });

  it('does not reach two lines down, nor from a trailing comment on the line above', async () => {
    const [far] = await check({ 'pump.py': pumpSource({ aboveForward: '        # noisewise: allow[unconstrained-std] clamped\n        y = 1' }) });
    expect(summary(far!)).toEqual(['unconstrained-std:warning:14:noise:self.sigma']);
    const [trailingAbove] = await check({ 'pump.py': pumpSource({ aboveForward: '        y = 1  # noisewise: allow[unconstrained-std] clamped' }) });
    expect(summary(trailingAbove!)).toEqual(['unconstrained-std:warning:13:noise:self.sigma']);
  });

  it('hides every finding of the rule in the file with allow-file, wherever it is', async () => {
    const [report] = await check({ 'pump.py': pumpSource({ footer: '# noisewise: allow-file[unconstrained-std] this file documents the mistake' }) });
    expect(summary(report!)).toEqual([]);
  });

  it('does not hide a finding with a suppression for another rule', async () => {
    const [report] = await check({ 'pump.py': pumpSource({ trailing: '  # noisewise: allow[unexplained-allow] not this rule' }) });
    expect(summary(report!)).toEqual([FLAGGED]);
  });

  it('honours a reasonless allow but reports it with unexplained-allow', async () => {
    const text = pumpSource({ trailing: '  # noisewise: allow[unconstrained-std]' });
    const [report] = await check({ 'pump.py': text });
    expect(summary(report!)).toEqual(['unexplained-allow:information:12:missingReason:# noisewise: allow[unconstrained-std]']);
    expect(report!.findings[0]!.message).toBe('This `allow[unconstrained-std]` gives no reason: say why the finding does not apply here, after the closing bracket, so a reviewer can check it.');
    const [quiet] = await check({ 'pump.py': `${text}# noisewise: allow-file[unexplained-allow] the lab accepts bare allows in this scratch file\n` });
    expect(summary(quiet!)).toEqual([]);
  });
});

describe('configured severities and rule selection', () => {
  const reasonless = pumpSource({ footer: '# noisewise: allow[unconstrained-std]' });
  const both = ['unconstrained-std:warning:12:noise:self.sigma', 'unexplained-allow:information:13:missingReason:# noisewise: allow[unconstrained-std]'];

  it('uses default severities, maps `info` to information, and drops rules set to `off`', async () => {
    const [defaults] = await check({ 'pump.py': reasonless });
    expect(summary(defaults!)).toEqual(both);
    const [configured] = await check({ 'pump.py': reasonless }, { severity: { 'unconstrained-std': 'info', 'unexplained-allow': 'error' } });
    expect(summary(configured!)).toEqual(['unconstrained-std:information:12:noise:self.sigma', 'unexplained-allow:error:13:missingReason:# noisewise: allow[unconstrained-std]']);
    const [hint] = await check({ 'pump.py': reasonless }, { severity: { 'unconstrained-std': 'hint' } });
    expect(summary(hint!)[0]).toBe('unconstrained-std:hint:12:noise:self.sigma');
    const [off] = await check({ 'pump.py': reasonless }, { severity: { 'unconstrained-std': 'off' } });
    expect(summary(off!)).toEqual([both[1]]);
  });

  it('restricts the run with `only` and `skip`', async () => {
    const [only] = await check({ 'pump.py': reasonless }, { rules: { only: ['unexplained-allow'] } });
    expect(summary(only!)).toEqual([both[1]]);
    const [skip] = await check({ 'pump.py': reasonless }, { rules: { skip: ['unexplained-allow'] } });
    expect(summary(skip!)).toEqual([both[0]]);
    const [emptyOnly] = await check({ 'pump.py': reasonless }, { rules: { only: [] } });
    expect(summary(emptyOnly!)).toEqual(both);
    const [onlyAndSkip] = await check({ 'pump.py': reasonless }, { rules: { only: ['unconstrained-std'], skip: ['unconstrained-std'] } });
    expect(summary(onlyAndSkip!)).toEqual([]);
  });

  it('lists the enabled rules with their effective severities', () => {
    const settings = { severity: { 'unconstrained-std': 'info' as const, 'unexplained-allow': 'off' as const }, datasetSizeNames: [] };
    expect(enabledRules(settings).map(({ rule, severity }) => [rule.meta.id, severity])).toEqual(
      allRules.filter((r) => r.meta.id !== 'unexplained-allow').map((r) => [r.meta.id, r.meta.id === 'unconstrained-std' ? 'information' : r.meta.defaultSeverity]),
    );
    expect(enabledRules({ severity: {}, datasetSizeNames: [] }, { only: ['unexplained-allow'] }).map(({ rule, severity }) => [rule.meta.id, severity])).toEqual([['unexplained-allow', 'information']]);
  });
});

/** A rule made for one test, registered only while `body` runs. */
function testRule(id: string, create: (context: RuleContext) => RuleListeners, defaultSeverity: Severity = 'warning'): RegisteredRule {
  return {
    meta: { id, title: `Test rule ${id}`, family: 'evaluation', defaultSeverity, status: { stage: 'experimental', since: '0.1.0' }, fix: 'none', messages: { seen: 'seen {what}', other: 'other {what}' }, settings: [] },
    create,
    doc: '',
  };
}

/** Registers rules for the duration of `body` and removes them afterwards, even when the body fails. */
async function withRules<T>(rules: RegisteredRule[], body: () => Promise<T>): Promise<T> {
  allRules.push(...rules);
  try {
    return await body();
  } finally {
    for (const rule of rules) {
      const index = allRules.indexOf(rule);
      if (index >= 0) allRules.splice(index, 1);
    }
  }
}

describe('a rule that throws', () => {
  const internal = (id: string, error: string, severity: Severity = 'warning') => ({
    finding: { rule: id, severity, path: 'pump.py', start: 0, end: 0, message: `internal error in rule ${id}; its findings for this file are left out: ${error}`, messageId: 'internal-error', figures: [], fixes: [], related: [] },
    note: { level: 'error', kind: 'internal', message: `rule ${id} failed on this file: ${error}` },
  });

  it('is contained: exactly one internal-error finding and a note for that file, other rules unaffected', async () => {
    const rule = testRule('test-throws-on-second-call', (context) => {
      let calls = 0;
      return {
        call(node) {
          context.report({ node, messageId: 'seen', data: { what: 'a call' } });
          calls++;
          if (calls === 2) throw new Error('second call refused');
        },
      };
    });
    const [pump, single] = await withRules([rule], () => check({ 'pump.py': pumpSource(), 'single.py': 'x = abs(1)\n' }));
    const expected = internal('test-throws-on-second-call', 'second call refused');
    expect(pump!.findings.filter((f) => f.rule === rule.meta.id)).toEqual([expected.finding]);
    expect(pump!.notes).toEqual([expected.note]);
    expect(summary(pump!).filter((s) => s.startsWith('unconstrained-std'))).toEqual([FLAGGED]);
    // The other file has one call: the rule does not throw there and reports normally.
    expect(summary(single!)).toEqual(['test-throws-on-second-call:warning:1:seen:abs(1)']);
    expect(single!.notes).toEqual([]);
    expect(allRules.some((r) => r.meta.id === rule.meta.id)).toBe(false);
  });

  it('is contained when it throws while being created, at file end, or misuses the report API', async () => {
    const inCreate = testRule('test-throws-in-create', () => {
      throw new Error('cannot start');
    });
    const atEnd = testRule('test-throws-at-end', () => ({
      'file:end'() {
        throw new TypeError('end refused');
      },
    }));
    const unknownMessage = testRule('test-unknown-message', (context) => ({
      module(node) {
        context.report({ node, messageId: 'nope' });
      },
    }));
    const nonError = testRule(
      'test-throws-a-string',
      () => ({
        module() {
          throw 'plain string';
        },
      }),
      'hint',
    );
    const [pump] = await withRules([inCreate, atEnd, unknownMessage, nonError], () => check({ 'pump.py': pumpSource() }));
    const cases = [
      internal('test-throws-in-create', 'cannot start'),
      internal('test-throws-at-end', 'end refused'),
      internal('test-unknown-message', "rule test-unknown-message has no message 'nope'"),
      // A failed hint rule is reported as information, so that the failure is visible.
      internal('test-throws-a-string', 'plain string', 'information'),
    ];
    expect(pump!.notes).toEqual(cases.map((c) => c.note));
    expect(pump!.findings.filter((f) => f.rule.startsWith('test-'))).toEqual(
      [...cases.map((c) => c.finding)].sort((a, b) => (a.rule < b.rule ? -1 : 1)),
    );
    expect(summary(pump!).filter((s) => s.startsWith('unconstrained-std'))).toEqual([FLAGGED]);
  });

  it('is contained when it reports a node of another file', async () => {
    const crossFile = testRule('test-reports-elsewhere', (context) => ({
      call(node) {
        const callee = context.sem.callee(node);
        if (callee.symbol?.kind === 'class') context.report({ node: callee.symbol.cls.node, messageId: 'seen', data: { what: 'a class' } });
      },
    }));
    const [script] = await withRules([crossFile], () => check({ 'run.py': 'from pump import BearingNoise\n\nnet = BearingNoise()\n', 'pump.py': pumpSource() }));
    expect(script!.notes).toEqual([{ level: 'error', kind: 'internal', message: 'rule test-reports-elsewhere failed on this file: rule test-reports-elsewhere reported a node of another file' }]);
    expect(script!.findings.map((f) => [f.rule, f.messageId])).toEqual([['test-reports-elsewhere', 'internal-error']]);
  });
});

describe('ordering and de-duplication', () => {
  it('sorts findings by position, then rule, then message, and drops exact duplicates', async () => {
    const text = 'a = 1\nb = 22\nc = 333\n';
    // Reports every integer twice, from the last to the first, with a second message on `22`.
    const echoB = testRule('test-echo-b', (context) => {
      const found: Parameters<RuleContext['report']>[0]['node'][] = [];
      return {
        integer(node) {
          found.push(node);
        },
        'file:end'() {
          for (const node of [...found].reverse()) {
            context.report({ node, messageId: 'seen', data: { what: node.text } });
            context.report({ node, messageId: 'seen', data: { what: node.text } });
            if (node.text === '22') context.report({ node, messageId: 'other', data: { what: node.text } });
          }
        },
      };
    });
    const echoA = testRule('test-echo-a', (context) => ({
      integer(node) {
        if (node.text === '22') context.report({ node, messageId: 'seen', data: { what: 'first by rule id' } });
      },
    }));
    const [report] = await withRules([echoB, echoA], () => check({ 'echo.py': text }));
    expect(report!.findings.filter((f) => f.rule.startsWith('test-')).map((f) => [f.rule, text.slice(f.start, f.end), f.message])).toEqual([
      ['test-echo-b', '1', 'seen 1'],
      ['test-echo-a', '22', 'seen first by rule id'],
      ['test-echo-b', '22', 'other 22'],
      ['test-echo-b', '22', 'seen 22'],
      ['test-echo-b', '333', 'seen 333'],
    ]);
  });

  it('returns reports in input order', async () => {
    const reports = await check({ 'zeta.py': 'x = 1\n', 'alpha.py': 'y = 2\n' });
    expect(reports.map((r) => r.path)).toEqual(['zeta.py', 'alpha.py']);
  });
});

describe('broken inputs', () => {
  it('still analyses a file with syntax errors and says so in a note', async () => {
    const text = pumpSource().replace('import torch\n', 'import torch\ndef broken(:\n    pass\n');
    const parser = await getParser();
    const errors = PythonDocument.parse(parser, text).syntax.errors.length;
    expect(errors).toBeGreaterThan(0);
    const [report] = await check({ 'pump.py': text });
    expect(report!.notes).toEqual([{ level: 'info', kind: 'syntax', message: `${errors} syntax error(s), the first at line 3; the rest of the file was still analysed` }]);
    expect(summary(report!)).toEqual(['unconstrained-std:warning:14:noise:self.sigma']);
  });

  it('skips a broken notebook with a note instead of failing', async () => {
    const reports = await check({
      'not-json.ipynb': '{"cells": [',
      'no-cells.ipynb': '{"cells": 5, "nbformat": 4}',
      'r-kernel.ipynb': JSON.stringify({ cells: [], metadata: { language_info: { name: 'R' } }, nbformat: 4 }),
      'fine.ipynb': notebookJson([{ type: 'code', source: 'import torch\n' }]),
    });
    expect(reports.map((r) => [r.path, r.findings.length, r.notes.map((n) => `${n.level}:${n.kind}:${n.message.replace(/\(.*\)$/, '(…)')}`)])).toEqual([
      ['not-json.ipynb', 0, ['warning:skipped:not a valid notebook: the file is not valid JSON (…)']],
      ['no-cells.ipynb', 0, ['warning:skipped:not a valid notebook: "cells" is missing or is not a list']],
      ['r-kernel.ipynb', 0, ['warning:skipped:notebook language is r, not Python']],
      ['fine.ipynb', 0, []],
    ]);
    expect(reports[0]!.text).toBe('');
  });

  it('refuses to check a file that is not in the workspace', async () => {
    const parser = await getParser();
    const workspace = new Workspace(VIRTUAL_ROOT, () => parser);
    expect(() => checkFile(workspace, path.join(VIRTUAL_ROOT, 'missing.py'), { severity: {}, datasetSizeNames: [] })).toThrow(`noisewise: ${path.join(VIRTUAL_ROOT, 'missing.py')} is not part of the workspace`);
  });
});

describe('checking a workspace incrementally', () => {
  it('changes the verdict on a script when a class it uses is edited in another file', async () => {
    const parser = await getParser();
    const workspace = new Workspace(VIRTUAL_ROOT, () => parser);
    const models = 'import torch\nfrom torch import nn\n\n\nclass BearingNoise(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.sigma = nn.Parameter(torch.ones(3))\n';
    const evaluate = 'import torch\nfrom models import BearingNoise\n\nnet = BearingNoise()\nnoisy = torch.randn(3) * net.sigma\n';
    const set = (p: string, text: string) => workspace.setFile({ path: p, absPath: path.join(VIRTUAL_ROOT, p), text });
    set('models.py', models);
    set('evaluate.py', evaluate);
    const settings = { severity: {}, datasetSizeNames: [] };
    const evaluatePath = path.join(VIRTUAL_ROOT, 'evaluate.py');
    expect(summary(checkFile(workspace, evaluatePath, settings))).toEqual(['unconstrained-std:warning:5:noise:net.sigma']);
    set('models.py', models.replace('nn.Parameter(torch.ones(3))', 'nn.Parameter(torch.ones(3)).exp()'));
    expect(summary(checkFile(workspace, evaluatePath, settings))).toEqual([]);
    set('models.py', models);
    expect(summary(checkFile(workspace, evaluatePath, settings))).toEqual(['unconstrained-std:warning:5:noise:net.sigma']);
  });
});

describe('finding ranges', () => {
  /** Every folder or file the harness and the demo check: rule cases, the corpus and the test workspaces. */
  function targets(): string[] {
    const repo = path.resolve(__dirname, '..');
    const out: string[] = [];
    for (const rule of fs.readdirSync(path.join(repo, 'rules'), { withFileTypes: true })) {
      if (!rule.isDirectory()) continue;
      const cases = path.join(repo, 'rules', rule.name, 'cases');
      if (fs.existsSync(cases)) for (const entry of fs.readdirSync(cases).sort()) out.push(path.join(cases, entry));
    }
    for (const base of ['tests/corpus', 'test-workspaces']) {
      const dir = path.join(repo, base);
      if (!fs.existsSync(dir)) continue;
      for (const entry of fs.readdirSync(dir, { withFileTypes: true })) if (entry.isDirectory()) out.push(path.join(dir, entry.name));
    }
    return out.filter((t) => fs.statSync(t).isDirectory() || /\.(py|ipynb)$/.test(t));
  }

  it('lie inside the analysed text, with sorted findings, related locations and fix edits inside their files', async () => {
    let findings = 0;
    for (const target of targets()) {
      const reports = await checkPath(target);
      const texts = new Map(reports.map((r) => [r.path, r.text]));
      for (const report of reports) {
        const length = report.text.length;
        for (const f of report.findings) {
          findings++;
          expect(f.path).toBe(report.path);
          expect(0 <= f.start && f.start <= f.end && f.end <= length, `${report.path} ${f.rule} ${f.start}-${f.end} of ${length}`).toBe(true);
          for (const r of f.related) {
            const relatedLength = (r.path === undefined ? report.text : texts.get(r.path))?.length ?? -1;
            expect(0 <= r.start && r.start <= r.end && r.end <= relatedLength, `${report.path} related ${r.path} ${r.start}-${r.end}`).toBe(true);
          }
          for (const fix of f.fixes) {
            for (const e of fix.edits) {
              const editLength = (e.path === undefined ? report.text : texts.get(e.path))?.length ?? -1;
              expect(0 <= e.start && e.start <= e.end && e.end <= editLength, `${report.path} fix ${fix.title} edits ${e.path} ${e.start}-${e.end}`).toBe(true);
            }
          }
        }
        const keys = report.findings.map((f) => [f.start, f.end, f.rule, f.message] as const);
        const sorted = [...keys].sort((a, b) => a[0] - b[0] || a[1] - b[1] || (a[2] < b[2] ? -1 : a[2] > b[2] ? 1 : 0) || (a[3] < b[3] ? -1 : a[3] > b[3] ? 1 : 0));
        expect(keys).toEqual(sorted);
      }
    }
    // The fixtures are meant to produce findings: an empty run would prove nothing.
    expect(findings).toBeGreaterThan(20);
  });
});
