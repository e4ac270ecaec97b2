// The engine run the property suites share: checks in-memory files as one workspace in a chosen order and asserts what
// must hold for any input (no failure escapes, no rule fails, every range inside its document).
import * as path from 'node:path';
import { expect } from 'vitest';
import { checkFile, getParser } from '../../server/src/engine/check';
import type { FileReport } from '../../server/src/engine/types';
import { Workspace } from '../../server/src/semantic/workspace';

/** The virtual root the in-memory workspaces live under (never read from disk). */
export const VIRTUAL_ROOT = path.resolve('/virtual/reliability');

/** An in-memory file to check. */
export interface MemoryFile {
  rel: string;
  text: string;
}

/**
 * Checks files as one workspace, visiting them in the given order (indexes into `files`), and returns the reports in
 * file order. `budgetMs` is the per-rule budget (the engine's default when omitted).
 */
export async function checkInOrder(files: readonly MemoryFile[], order: readonly number[], options: { budgetMs?: number } = {}): Promise<FileReport[]> {
  const parser = await getParser();
  const workspace = new Workspace(VIRTUAL_ROOT, () => parser);
  for (const f of files) workspace.setFile({ path: f.rel, absPath: path.join(VIRTUAL_ROOT, f.rel), text: f.text });
  const reports: FileReport[] = new Array(files.length);
  for (const i of order) {
    reports[i] = checkFile(workspace, path.join(VIRTUAL_ROOT, files[i]!.rel), { severity: {}, datasetSizeNames: [] }, undefined, options);
  }
  return reports;
}

/** What must be equal between two checks of the same input: every finding (position, rule, message, fixes) and note. */
export function fingerprint(reports: readonly FileReport[]): string {
  return JSON.stringify(reports.map((r) => ({ path: r.path, findings: r.findings, notes: r.notes })));
}

/**
 * Asserts what holds for any input: no rule or analysis failed (an internal error is a bug, even contained), findings
 * are sorted and lie inside the analysed text, their related locations and fix edits inside the texts of their files.
 */
export function expectSane(reports: readonly FileReport[], label: string): void {
  const byPath = new Map(reports.map((r) => [r.path, r]));
  for (const report of reports) {
    const internal = report.notes.filter((n) => n.kind === 'internal');
    expect(internal, `${label}: ${report.path}: an internal error`).toEqual([]);
    expect(report.findings.filter((f) => f.messageId === 'internal-error'), `${label}: ${report.path}`).toEqual([]);
    const length = report.text.length;
    let previous = -1;
    for (const f of report.findings) {
      const where = `${label}: ${report.path}: ${f.rule} at ${f.start}-${f.end} of ${length}`;
      expect(f.start >= 0 && f.start <= f.end && f.end <= length, where).toBe(true);
      expect(f.start >= previous, `${where}: findings out of order`).toBe(true);
      previous = f.start;
      expect(f.message.length, where).toBeGreaterThan(0);
      expect(f.message, where).not.toMatch(/\{\w+\}/);
      for (const r of f.related) {
        const target = r.path === undefined ? report : (byPath.get(r.path) ?? reports.find((x) => x.absPath === r.path));
        if (!target) continue;
        expect(r.start >= 0 && r.start <= r.end && r.end <= target.text.length, `${where}: related location ${r.start}-${r.end}`).toBe(true);
      }
      for (const fix of f.fixes) {
        for (const e of fix.edits) {
          const target = e.path === undefined ? report : (byPath.get(e.path) ?? reports.find((x) => x.absPath === e.path));
          expect(target, `${where}: fix edits ${e.path}, which is not in the workspace`).toBeDefined();
          expect(e.start >= 0 && e.start <= e.end && e.end <= target!.text.length, `${where}: fix edit ${e.start}-${e.end} of ${target!.text.length}`).toBe(true);
        }
      }
    }
  }
}
