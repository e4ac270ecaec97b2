// The --fix machinery: which safe fixes are chosen, how texts and notebooks are rewritten, and how the re-check loop ends.
import { describe, expect, it } from 'vitest';
import type { Fix } from '../server/src/engine/finding';
import type { CheckInput, FileReport } from '../server/src/engine/types';
import { MAX_FIX_ROUNDS, planFixes, rewriteFile, runFixLoop } from '../server/src/cli/fix';
import { readNotebook } from '../server/src/parse/notebook';
import { findingIn, notebookJson, notebookReport, pythonReport } from './helpers/cli-reports';

function fix(start: number, end: number, newText: string, safety: Fix['safety'] = 'safe', path?: string): Fix {
  return { title: `replace with ${newText}`, safety, edits: [{ start, end, newText, ...(path ? { path } : {}) }] };
}

describe('planFixes', () => {
  it('takes the first safe fix of each finding and ignores review fixes', () => {
    const text = 'a = sd * eps\n';
    const r = pythonReport('m.py', text, [{ covers: 'sd', fixes: [fix(4, 6, 'review_me', 'review'), fix(4, 6, 'sd.exp()')] }, { covers: 'eps', fixes: [fix(9, 12, 'x', 'review')] }]);
    const plan = planFixes([r], () => true);
    expect(plan.map((p) => p.fix.edits[0]!.newText)).toEqual(['sd.exp()']);
  });

  it('keeps the first of overlapping fixes by position, and treats two insertions at one place as overlapping', () => {
    const text = 'abcdefghij';
    const r = pythonReport('m.py', text, [
      { covers: 'cdef', fixes: [fix(2, 6, 'X')] },
      { covers: 'ab', fixes: [fix(0, 3, 'Y')] },
      { covers: 'gh', fixes: [fix(6, 6, '+')] },
      { covers: 'hi', fixes: [fix(6, 6, '-')] },
      { covers: 'j', fixes: [fix(9, 10, 'J')] },
    ]);
    const plan = planFixes([r], () => true);
    expect(plan.map((p) => p.fix.edits[0]!.newText)).toEqual(['Y', '+', 'J']);
  });

  it('lets a replacement and an insertion that only touch it both through', () => {
    const r = pythonReport('m.py', 'abcdef', [
      { covers: 'ab', fixes: [fix(0, 2, 'X')] },
      { covers: 'cd', fixes: [fix(2, 2, '+')] },
    ]);
    expect(planFixes([r], () => true)).toHaveLength(2);
  });

  it('resolves edits into other checked files and skips fixes into files that are missing or not writable', () => {
    const a = pythonReport('a.py', 'from b import s\nx = s\n', [{ covers: 's', from: 16, fixes: [{ title: 't', safety: 'safe', edits: [{ start: 20, end: 21, newText: 's2' }, { path: 'b.py', start: 0, end: 1, newText: 's2' }] }] }]);
    const b = pythonReport('b.py', 's = 1\n');
    expect(planFixes([a, b], () => true)[0]!.edits.map((e) => e.report.path)).toEqual(['a.py', 'b.py']);
    expect(planFixes([a, b], (r) => r.path !== 'b.py')).toEqual([]);
    expect(planFixes([a], () => true)).toEqual([]);
  });

  it('drops a fix with an edit outside the text', () => {
    const r = pythonReport('m.py', 'abc', [{ covers: 'a', fixes: [fix(2, 9, 'X')] }]);
    expect(planFixes([r], () => true)).toEqual([]);
  });
});

describe('rewriteFile', () => {
  it('applies edits from the end and converts inserted line breaks to the file’s own', () => {
    const r = pythonReport('m.py', 'a = 1\r\nb = 2\r\n');
    const out = rewriteFile(r, [{ start: 0, end: 1, newText: 'aa' }, { start: 7, end: 8, newText: 'import x\nbb' }], { lineEnding: '\r\n' });
    expect(out).toBe('aa = 1\r\nimport x\r\nbb = 2\r\n');
  });

  it('writes notebook edits into the cells without touching the report’s model', () => {
    const raw = notebookJson([
      { type: 'markdown', source: '# Leaf spectra\n' },
      { type: 'code', source: 'scale = tf.Variable(1.0)\ny = scale * z\n' },
    ]);
    const r = notebookReport('leaf.ipynb', raw);
    const at = r.text.indexOf('scale *');
    const out = rewriteFile(r, [{ start: at, end: at + 5, newText: 'tf.exp(scale)' }], { lineEnding: '\n' });
    expect(JSON.parse(out).cells[1].source).toEqual(['scale = tf.Variable(1.0)\n', 'y = tf.exp(scale) * z\n']);
    expect(JSON.stringify(r.notebook!.json)).toBe(JSON.stringify(JSON.parse(raw)));
    // A notebook written with CRLF keeps them: the new source is spliced into the file's own text.
    const crlf = notebookReport('leaf.ipynb', raw.replace(/\n/g, '\r\n'));
    const crlfOut = rewriteFile(crlf, [{ start: at, end: at + 5, newText: 'q' }], { lineEnding: '\r\n' });
    expect(crlfOut).toContain('\r\n "cells"');
    expect(crlfOut.replace(/\r\n/g, '')).not.toContain('\n');
  });
});

/**
 * A stand-in for the engine, for testing the loop alone: it reports every `raw_sd` with a safe fix that wraps it,
 * and (when `endless`) every `w` with a fix that appends another `w`, which never settles.
 */
function fakeCheck(options: { endless?: boolean; calls: CheckInput[][] }) {
  return async (inputs: CheckInput[]): Promise<FileReport[]> => {
    options.calls.push(inputs);
    return inputs.map((input) => {
      const report = pythonReport(input.path, input.text);
      let at = input.text.indexOf('raw_sd');
      while (at >= 0) {
        if (!input.text.startsWith('exp(raw_sd)', at - 4)) {
          report.findings.push({ ...findingIn(input.text, input.path, { covers: 'raw_sd', from: at }), fixes: [fix(at, at + 6, 'exp(raw_sd)')] });
        }
        at = input.text.indexOf('raw_sd', at + 1);
      }
      if (options.endless && input.text.includes('w')) {
        const end = input.text.lastIndexOf('w') + 1;
        report.findings.push({ ...findingIn(input.text, input.path, { covers: 'w' }), fixes: [fix(end, end, 'w')] });
      }
      return report;
    });
  };
}

describe('runFixLoop', () => {
  it('applies fixes, re-checks and stops when nothing is left', async () => {
    const calls: CheckInput[][] = [];
    const result = await runFixLoop({
      files: [
        { input: { path: 'a.py', absPath: '/x/a.py', text: 'y = raw_sd + raw_sd\n' }, writable: true, style: { lineEnding: '\n' } },
        { input: { path: 'b.py', absPath: '/x/b.py', text: 'z = 1\n' }, writable: true, style: { lineEnding: '\n' } },
      ],
      check: fakeCheck({ calls }),
    });
    expect(result.inputs.map((i) => i.text)).toEqual(['y = exp(raw_sd) + exp(raw_sd)\n', 'z = 1\n']);
    expect(result.fixesApplied).toBe(2);
    expect([...result.changed]).toEqual(['a.py']);
    expect(result.reports.flatMap((r) => r.findings)).toEqual([]);
    expect(calls).toHaveLength(2);
    expect(result.notes).toEqual([]);
  });

  it('leaves files that cannot be written alone and says why', async () => {
    const result = await runFixLoop({
      files: [{ input: { path: 'l.py', absPath: '/x/l.py', text: 'raw_sd\n' }, writable: false, readOnlyReason: 'it could not be decoded without loss', style: { lineEnding: '\n' } }],
      check: fakeCheck({ calls: [] }),
    });
    expect(result.changed.size).toBe(0);
    expect(result.reports[0]!.findings).toHaveLength(1);
    expect(result.notes).toEqual([{ path: 'l.py', level: 'warning', kind: 'fix', message: 'fixes not applied: it could not be decoded without loss' }]);
  });

  it(`gives up after ${MAX_FIX_ROUNDS} rounds of fixes that never settle, and says so`, async () => {
    const calls: CheckInput[][] = [];
    const result = await runFixLoop({
      files: [{ input: { path: 'w.py', absPath: '/x/w.py', text: 'w\n' }, writable: true, style: { lineEnding: '\n' } }],
      check: fakeCheck({ endless: true, calls }),
    });
    expect(calls).toHaveLength(MAX_FIX_ROUNDS + 1);
    expect(result.inputs[0]!.text).toBe(`${'w'.repeat(MAX_FIX_ROUNDS + 1)}\n`);
    expect(result.notes.map((n) => n.message)).toEqual([`fixes were still being offered after ${MAX_FIX_ROUNDS} rounds; run --fix again and review the result`]);
  });

  it('never applies a notebook fix that spans two cells, and applies the others', async () => {
    const raw = notebookJson([
      { type: 'code', source: 'a = raw_sd\n' },
      { type: 'code', source: 'b = 2\n' },
    ]);
    const model = readNotebook(raw);
    let round = 0;
    const check = async (inputs: CheckInput[]): Promise<FileReport[]> => {
      round++;
      const report = notebookReport('n.ipynb', inputs[0]!.text);
      if (round === 1) {
        const at = model.text.indexOf('raw_sd');
        const span = model.text.indexOf('b = 2');
        report.findings = [
          { ...findingIn(report.text, 'n.ipynb', { covers: 'a' }), fixes: [fix(0, span + 1, 'x')] },
          { ...findingIn(report.text, 'n.ipynb', { covers: 'raw_sd' }), fixes: [fix(at, at + 6, 'exp(raw_sd)')] },
        ];
      }
      return [report];
    };
    const result = await runFixLoop({ files: [{ input: { path: 'n.ipynb', absPath: '/x/n.ipynb', text: raw }, writable: true, style: { lineEnding: '\n' } }], check });
    expect(JSON.parse(result.inputs[0]!.text).cells.map((c: { source: string[] }) => c.source.join(''))).toEqual(['a = exp(raw_sd)\n', 'b = 2\n']);
    expect(result.fixesApplied).toBe(1);
  });
});
