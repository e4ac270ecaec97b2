// Test helpers that drive the real engine on files and folders (no mocks): check, locate, apply fixes.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { checkSources } from '../../server/src/engine/check';
import type { Finding, Fix } from '../../server/src/engine/finding';
import { applyTextEdits } from '../../server/src/engine/fix';
import type { FileReport } from '../../server/src/engine/types';
import { applyNotebookEdits } from '../../server/src/parse/notebook';

/** Lists .py and .ipynb files under a folder (or the file itself), sorted. */
export function sourceFiles(target: string): string[] {
  const stat = fs.statSync(target);
  if (stat.isFile()) return [target];
  const out: string[] = [];
  const walk = (dir: string) => {
    for (const entry of fs.readdirSync(dir, { withFileTypes: true }).sort((a, b) => a.name.localeCompare(b.name))) {
      const full = path.join(dir, entry.name);
      if (entry.isDirectory()) walk(full);
      else if (/\.(py|ipynb)$/.test(entry.name)) out.push(full);
    }
  };
  walk(target);
  return out;
}

/** Checks a file or a folder (as one workspace) with the real engine; paths in reports are relative to `root`. */
export async function checkPath(target: string, options: { root?: string; only?: string[]; texts?: Map<string, string> } = {}): Promise<FileReport[]> {
  const root = options.root ?? (fs.statSync(target).isDirectory() ? target : path.dirname(target));
  const files = sourceFiles(target);
  return checkSources(
    files.map((f) => ({ path: path.relative(root, f).split(path.sep).join('/'), absPath: path.resolve(f), text: options.texts?.get(path.resolve(f)) ?? fs.readFileSync(f, 'utf8') })),
    { workspaceRoot: root, settingsFor: () => ({ severity: {}, datasetSizeNames: [] }), rules: options.only ? { only: options.only } : undefined },
  );
}

/** Checks in-memory texts as one workspace rooted at a virtual folder. */
export async function checkTexts(files: Record<string, string>, only?: string[]): Promise<FileReport[]> {
  const root = path.resolve('/virtual-workspace');
  return checkSources(
    Object.entries(files).map(([p, text]) => ({ path: p, absPath: path.join(root, p), text })),
    { workspaceRoot: root, settingsFor: () => ({ severity: {}, datasetSizeNames: [] }), rules: only ? { only } : undefined },
  );
}

/**
 * Applies one fix per finding (chosen by `pick`) across all reports, skipping fixes that overlap one already taken.
 * Returns the new file texts (raw file text: notebook JSON for notebooks), keyed by report path.
 */
export function applyFixes(reports: FileReport[], pick: (finding: Finding) => Fix | undefined): Map<string, string> {
  const byPath = new Map(reports.map((r) => [r.path, r]));
  const edits = new Map<string, { start: number; end: number; newText: string }[]>();
  for (const report of reports) {
    for (const finding of report.findings) {
      const fix = pick(finding);
      if (!fix) continue;
      const planned = fix.edits.map((e) => ({ path: e.path ?? report.path, start: e.start, end: e.end, newText: e.newText }));
      const clash = planned.some((e) => (edits.get(e.path) ?? []).some((o) => e.start < o.end && o.start < e.end || (e.start === o.start && e.end === o.end)));
      if (clash) continue;
      for (const e of planned) {
        const list = edits.get(e.path) ?? [];
        list.push(e);
        edits.set(e.path, list);
      }
    }
  }
  const out = new Map<string, string>();
  for (const [p, list] of edits) {
    const report = byPath.get(p);
    if (!report) throw new Error(`a fix edits ${p}, which was not checked`);
    if (report.kind === 'notebook') out.set(p, applyNotebookEdits({ ...report.notebook!, json: structuredClone(report.notebook!.json) }, list));
    else out.set(p, applyTextEdits(report.text, list));
  }
  return out;
}
