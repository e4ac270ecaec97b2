// The language server checks an open file on the syntax tree it re-parses after every edit, with the unchanged
// subtrees taken over from the previous version (parse/syntax.ts, SubtreeReuse). Whatever is typed, the findings must
// be exactly those of a fresh check of the same text: this drives the real documents, workspace and rules over every
// flagged rule case, in the order the server uses them (the file read from disk first, then opened, then edited).
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { checkFile, getParser } from '../server/src/engine/check';
import type { FileReport } from '../server/src/engine/types';
import { OpenDocuments } from '../server/src/lsp/documents';
import { PythonDocument } from '../server/src/parse/document';
import { LineIndex } from '../server/src/parse/positions';
import { Workspace } from '../server/src/semantic/workspace';
import { sourceFiles } from './helpers/engine';

const SETTINGS = { severity: {}, datasetSizeNames: [] };

function summary(report: FileReport): string[] {
  return report.findings.map((f) => `${f.rule} ${f.start}-${f.end} ${f.message} ${JSON.stringify(f.fixes)} ${JSON.stringify(f.related)}`);
}

describe('checking an edited document', () => {
  it('finds the same as a fresh check after every edit, on every flagged rule case', async () => {
    const parser = await getParser();
    const root = path.resolve(__dirname, '..');
    const cases = sourceFiles(path.join(root, 'rules')).filter((f) => /\/cases\/(.*\/)?flagged[^/]*\.py$/.test(f));
    expect(cases.length).toBeGreaterThan(20);
    let seed = 7;
    const random = (n: number) => {
      seed = (seed * 1103515245 + 12345) % 2147483648;
      return seed % n;
    };
    let compared = 0;
    let withFindings = 0;
    for (const file of cases) {
      const dir = path.dirname(file);
      const absPath = path.join(dir, path.basename(file));
      const rel = path.basename(file);
      const disk = fs.readFileSync(file, 'utf8');
      const workspace = new Workspace(dir, () => parser);
      // As the server does: the indexing pass reads the file from disk, then the editor opens it.
      workspace.setFile({ path: rel, absPath, text: disk });
      checkFile(workspace, absPath, SETTINGS);
      const docs = new OpenDocuments(() => parser);
      const uri = `file://${absPath}`;
      const open = docs.openText({ uri, languageId: 'python', version: 1, text: disk }, absPath);
      workspace.setFile({ path: rel, absPath, text: open.text, parsed: () => open.doc.syntax });
      checkFile(workspace, absPath, SETTINGS);
      const edits = [
        // A comment line above everything: every node moves.
        (_t: string) => ({ at: 0, end: 0, text: '# gauge 17\n' }),
        // A statement appended at the end.
        (t: string) => ({ at: t.length, end: t.length, text: '\nrate_0 = 0.5\n' }),
        // A character typed somewhere, or a few deleted.
        (t: string) => {
          const at = random(t.length);
          return { at, end: random(2) === 0 ? Math.min(t.length, at + 1 + random(4)) : at, text: random(2) === 0 ? '' : ['x', ' ', '\n', '(', '#'][random(5)]! };
        },
        // The first comment line removed again.
        (t: string) => ({ at: 0, end: t.startsWith('# gauge 17\n') ? '# gauge 17\n'.length : 0, text: '' }),
      ];
      let version = 1;
      for (const make of edits) {
        const text = open.text;
        const { at, end, text: piece } = make(text);
        // Surrogate pairs stay whole (as an editor keeps them).
        if (/[\uDC00-\uDFFF]/.test(text[at] ?? '') || /[\uDC00-\uDFFF]/.test(text[end] ?? '')) continue;
        const index = new LineIndex(text);
        docs.changeText(uri, ++version, [{ range: { start: index.toLsp(at), end: index.toLsp(end) }, text: piece }]);
        workspace.setFile({ path: rel, absPath, text: open.text, parsed: () => open.doc.syntax });
        const edited = checkFile(workspace, absPath, SETTINGS);
        const freshWorkspace = new Workspace(dir, () => parser);
        freshWorkspace.setFile({ path: rel, absPath, text: open.text });
        const fresh = checkFile(freshWorkspace, absPath, SETTINGS);
        expect(summary(edited), `${path.relative(root, file)} after ${JSON.stringify({ at, end, piece })}`).toEqual(summary(fresh));
        compared++;
        if (fresh.findings.length > 0) withFindings++;
      }
      expect(open.doc.syntax.reusedNodes).toBeGreaterThan(0);
      docs.disposeAll();
    }
    expect(compared).toBeGreaterThan(80);
    expect(withFindings / compared).toBeGreaterThan(0.7);
  });
});

describe('a syntax tree re-parsed away under an analysis', () => {
  it('is noticed: the workspace builds the analysis again instead of using nodes that moved to another copy', async () => {
    const parser = await getParser();
    const root = path.resolve('/virtual/spent');
    const absPath = path.join(root, 'gauge.py');
    const text = fs.readFileSync(path.resolve(__dirname, '..', 'rules', 'unconstrained-std', 'cases', 'flagged-basic.py'), 'utf8');
    const first = PythonDocument.parse(parser, text, true);
    const workspace = new Workspace(root, () => parser);
    workspace.setFile({ path: 'gauge.py', absPath, text, parsed: first.syntax });
    const before = checkFile(workspace, absPath, SETTINGS);
    expect(before.findings.length).toBeGreaterThan(0);
    // A re-parse that leaves the text as it was: every node moves into the new copy, and the workspace, told the
    // same text, keeps its analysis.
    const second = first.edit(parser, [{ start: 0, end: 0, newText: '' }]);
    expect(second.syntax.reusedNodes).toBeGreaterThan(0);
    expect(first.syntax.spent).toBe(true);
    expect(workspace.setFile({ path: 'gauge.py', absPath, text, parsed: second.syntax })).toBe(false);
    const after = checkFile(workspace, absPath, SETTINGS);
    expect(after.notes).toEqual(before.notes);
    expect(summary(after)).toEqual(summary(before));
    expect(workspace.analysis(absPath)!.syntax).toBe(second.syntax);
    second.dispose();
  });
});
