// Applies the engine's safe fixes for `--fix` and `--diff`: picks non-overlapping ones, rewrites the texts (notebooks
// through their cells), re-checks and repeats until nothing changes or the round limit is reached.
import type { Finding, Fix, TextEdit } from '../engine/finding';
import type { CheckInput, FileReport } from '../engine/types';
import { applyNotebookEdits, locateInNotebook } from '../parse/notebook';
import { type CliNote, compareStrings } from './files';
import { reportByPath, slashPath } from './format/common';

/** How many times fixes are applied and the files re-checked before giving up on convergence. */
export const MAX_FIX_ROUNDS = 5;

/** A fix chosen for application, with its edits grouped by the report they apply to. */
export interface PlannedFix {
  finding: Finding;
  fix: Fix;
  edits: { report: FileReport; edit: TextEdit }[];
}

/** The report an edit applies to: the edit's own path when it names another file, else the finding's file. */
function targetReport(reports: readonly FileReport[], findingReport: FileReport, edit: TextEdit): FileReport | undefined {
  if (edit.path === undefined || slashPath(edit.path) === slashPath(findingReport.path) || edit.path === findingReport.absPath) return findingReport;
  return reportByPath({ reports }, edit.path);
}

/** Whether two edits of one file conflict: their ranges overlap, or they start at the same place. */
function conflicts(a: TextEdit, b: TextEdit): boolean {
  if (a.start === b.start) return true;
  return a.start < b.end && b.start < a.end;
}

/** Whether an edit lies inside its file's text and, in a notebook, inside one cell. */
function editFits(report: FileReport, edit: TextEdit): boolean {
  if (edit.start < 0 || edit.end < edit.start || edit.end > report.text.length) return false;
  if (report.kind !== 'notebook') return true;
  const model = report.notebook;
  if (!model || model.cells.length === 0) return false;
  return locateInNotebook(model, edit.start).cell === locateInNotebook(model, edit.end).cell;
}

/**
 * Chooses the fixes to apply: for every finding its first `safe` fix, in file and position order; a fix whose edits
 * overlap an already chosen edit is left for a later round; one that touches a file that may not be written, or
 * that does not fit its file (outside the text, across notebook cells), is never applied.
 */
export function planFixes(reports: readonly FileReport[], canWrite: (report: FileReport) => boolean): PlannedFix[] {
  const candidates: PlannedFix[] = [];
  for (const report of reports) {
    for (const finding of report.findings) {
      const fix = finding.fixes.find((f) => f.safety === 'safe');
      if (!fix || fix.edits.length === 0) continue;
      const edits: PlannedFix['edits'] = [];
      let usable = true;
      for (const edit of fix.edits) {
        const target = targetReport(reports, report, edit);
        if (!target || !canWrite(target) || !editFits(target, edit)) {
          usable = false;
          break;
        }
        edits.push({ report: target, edit });
      }
      if (usable) candidates.push({ finding, fix, edits });
    }
  }
  candidates.sort((a, b) => compareStrings(slashPath(a.edits[0]!.report.path), slashPath(b.edits[0]!.report.path)) || a.edits[0]!.edit.start - b.edits[0]!.edit.start);
  const chosen: PlannedFix[] = [];
  const taken = new Map<FileReport, TextEdit[]>();
  for (const candidate of candidates) {
    const clash = candidate.edits.some(({ report, edit }, i) =>
      (taken.get(report) ?? []).some((other) => conflicts(edit, other)) ||
      candidate.edits.some((o, j) => j < i && o.report === report && conflicts(edit, o.edit)),
    );
    if (clash) continue;
    chosen.push(candidate);
    for (const { report, edit } of candidate.edits) {
      const list = taken.get(report) ?? [];
      list.push(edit);
      taken.set(report, list);
    }
  }
  return chosen;
}

/** How a rewritten file should look: its line break, for edits that insert new lines. */
export interface RewriteStyle {
  lineEnding: '\n' | '\r\n' | '\r';
}

/**
 * The new text of a file after edits (offsets into `report.text`, non-overlapping). Python text is edited directly,
 * with inserted line breaks converted to the file's own; a notebook's edits go into its cells and the notebook JSON
 * is written out again. Throws when an edit cannot be applied (for example one that spans two cells).
 */
export function rewriteFile(report: FileReport, edits: readonly TextEdit[], style: RewriteStyle): string {
  const { lineEnding } = style;
  const toEol = (text: string): string => (lineEnding === '\n' ? text : text.replace(/\r\n|\r|\n/g, lineEnding));
  if (report.kind === 'notebook') {
    const model = report.notebook;
    if (!model) throw new Error('the notebook could not be read, so it cannot be fixed');
    const out = applyNotebookEdits(
      model,
      edits.map((e) => ({ start: e.start, end: e.end, newText: e.newText })),
    );
    // Spliced into the file's own text, the output already has the file's line breaks everywhere.
    return model.raw === undefined ? toEol(out) : out;
  }
  let text = report.text;
  const ordered = [...edits].sort((a, b) => b.start - a.start);
  for (const edit of ordered) text = text.slice(0, edit.start) + toEol(edit.newText) + text.slice(edit.end);
  return text;
}

/** A file the fix loop may rewrite: its current input and how it is written. */
export interface FixableInput {
  input: CheckInput;
  writable: boolean;
  /** Why the file may not be written, for the note (when `writable` is false). */
  readOnlyReason?: string;
  style: RewriteStyle;
}

/** Outcome of the fix loop. */
export interface FixLoopResult {
  /** Reports of the final texts (what remains after fixing). */
  reports: FileReport[];
  /** The final inputs (texts after all rounds). */
  inputs: CheckInput[];
  /** Fixes applied over all rounds. */
  fixesApplied: number;
  /** Fixes applied per file (a fix counts for the file of its first edit). */
  fixesByFile: Map<string, number>;
  /** Paths whose text changed. */
  changed: Set<string>;
  notes: CliNote[];
}

/** Rewrites every file touched by the plan; returns the new text per path. */
function rewriteAll(plan: readonly PlannedFix[], byPath: ReadonlyMap<string, FixableInput>): Map<string, string> {
  const perFile = new Map<FileReport, TextEdit[]>();
  for (const planned of plan) {
    for (const { report, edit } of planned.edits) {
      const list = perFile.get(report) ?? [];
      list.push(edit);
      perFile.set(report, list);
    }
  }
  const out = new Map<string, string>();
  for (const [report, edits] of perFile) out.set(report.path, rewriteFile(report, edits, byPath.get(report.path)!.style));
  return out;
}

/**
 * Checks, applies the chosen safe fixes, re-checks and repeats, up to MAX_FIX_ROUNDS applications, until a round
 * changes nothing. Only files marked writable are rewritten.
 */
export async function runFixLoop(options: {
  files: readonly FixableInput[];
  check: (inputs: CheckInput[]) => Promise<FileReport[]>;
  onRound?: (round: number) => void;
}): Promise<FixLoopResult> {
  const byPath = new Map(options.files.map((f) => [f.input.path, { ...f, input: { ...f.input } }]));
  const inputs = (): CheckInput[] => [...byPath.values()].map((f) => f.input);
  const notes: CliNote[] = [];
  const noted = new Set<string>();
  const changed = new Set<string>();
  let fixesApplied = 0;
  const fixesByFile = new Map<string, number>();
  let reports = await options.check(inputs());
  for (let round = 1; round <= MAX_FIX_ROUNDS; round++) {
    const canWrite = (report: FileReport): boolean => byPath.get(report.path)?.writable === true;
    for (const report of reports) {
      if (!canWrite(report) && byPath.has(report.path) && report.findings.some((f) => f.fixes.some((x) => x.safety === 'safe')) && !noted.has(report.path)) {
        noted.add(report.path);
        const reason = byPath.get(report.path)!.readOnlyReason ?? 'the file may not be written';
        notes.push({ path: report.path, level: 'warning', kind: 'fix', message: `fixes not applied: ${reason}` });
      }
    }
    const plan = planFixes(reports, canWrite);
    if (plan.length === 0) break;
    let rewritten: Map<string, string>;
    try {
      rewritten = rewriteAll(plan, byPath);
    } catch (error) {
      notes.push({ path: plan[0]!.edits[0]!.report.path, level: 'warning', kind: 'fix', message: `fixing stopped: ${(error as Error).message}` });
      break;
    }
    let progressed = false;
    for (const [filePath, text] of rewritten) {
      const file = byPath.get(filePath)!;
      if (text === file.input.text) continue;
      file.input = { ...file.input, text };
      changed.add(filePath);
      progressed = true;
    }
    fixesApplied += plan.length;
    for (const planned of plan) {
      const filePath = planned.edits[0]!.report.path;
      fixesByFile.set(filePath, (fixesByFile.get(filePath) ?? 0) + 1);
    }
    if (!progressed) break;
    options.onRound?.(round + 1);
    reports = await options.check(inputs());
    if (round === MAX_FIX_ROUNDS) {
      for (const planned of planFixes(reports, canWrite)) {
        const filePath = planned.edits[0]!.report.path;
        if (noted.has(`rounds:${filePath}`)) continue;
        noted.add(`rounds:${filePath}`);
        notes.push({
          path: filePath,
          level: 'warning',
          kind: 'fix',
          message: `fixes were still being offered after ${MAX_FIX_ROUNDS} rounds; run --fix again and review the result`,
        });
      }
    }
  }
  return { reports, inputs: inputs(), fixesApplied, fixesByFile, changed, notes };
}
