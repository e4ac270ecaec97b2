// What every output format receives (the outcome of one `noisewise check` run) and the helpers they share.
import type { Finding, Severity } from '../../engine/finding';
import type { RuleMeta } from '../../engine/rule-meta';
import type { FileReport } from '../../engine/types';
import { type CliRange, cliRange } from '../../parse/locations';
import type { CliNote } from '../files';

/** The outcome of one check run, as the formatters print it. */
export interface CheckOutcome {
  /** One report per checked file, sorted by path. */
  reports: FileReport[];
  /** Notes about files that were skipped or only partly analysed, sorted by path. */
  notes: CliNote[];
  /** Every rule of the registry with its page (SARIF lists them). */
  rules: readonly RuleEntry[];
  /** Number of files read and checked. */
  filesChecked: number;
  /** Fixes written (`--fix`) or shown (`--diff`); 0 otherwise. */
  fixesApplied: number;
  /** Files changed by those fixes. */
  filesFixed: number;
  fixMode: 'none' | 'fix' | 'diff';
  /** The tool's version. */
  version: string;
  /** Absolute working directory; paths in the output are relative to it. */
  cwd: string;
  /** The raw text of each checked file by report path (the notebook JSON for notebooks), for SARIF fixes. */
  sources: ReadonlyMap<string, string>;
  /** Whether the run is complete: false when the engine failed on something (SARIF `executionSuccessful`). */
  complete: boolean;
}

/** A rule as the registry lists it: its metadata and its page (Markdown). */
export interface RuleEntry {
  meta: RuleMeta;
  doc: string;
}

/** A finding with its file and printed range. */
export interface PlacedFinding {
  report: FileReport;
  finding: Finding;
  range: CliRange;
}

/** The CLI's word for a severity (`information` is printed `info`). */
export type SeverityWord = 'error' | 'warning' | 'info' | 'hint';

/** The CLI's word for an engine severity. */
export function severityWord(severity: Severity): SeverityWord {
  return severity === 'information' ? 'info' : severity;
}

/** Whether `noisewise check --fix` can fix the finding (it has a fix marked safe). */
export function isFixable(finding: Finding): boolean {
  return finding.fixes.some((fix) => fix.safety === 'safe');
}

/** A path with forward slashes. */
export function slashPath(p: string): string {
  return p.replace(/\\/g, '/');
}

/** Every finding of the outcome, in report order, then by position and rule within a file, with printed ranges. */
export function placedFindings(outcome: { reports: readonly FileReport[] }): PlacedFinding[] {
  const out: PlacedFinding[] = [];
  for (const report of outcome.reports) {
    const ordered = [...report.findings].sort((a, b) => a.start - b.start || a.end - b.end || (a.rule < b.rule ? -1 : a.rule > b.rule ? 1 : 0));
    for (const finding of ordered) out.push({ report, finding, range: cliRange(report, finding.start, finding.end) });
  }
  return out;
}

/** Counts of findings by CLI severity word. */
export function countBySeverity(findings: readonly PlacedFinding[]): Record<SeverityWord, number> {
  const counts: Record<SeverityWord, number> = { error: 0, warning: 0, info: 0, hint: 0 };
  for (const { finding } of findings) counts[severityWord(finding.severity)]++;
  return counts;
}

/** "1 finding", "2 findings": a count with its noun in the right number. */
export function plural(count: number, singular: string, pluralForm = `${singular}s`): string {
  return `${count} ${count === 1 ? singular : pluralForm}`;
}

/** The report of another file named by an edit or related location (same path form as the reports'). */
export function reportByPath(outcome: { reports: readonly FileReport[] }, filePath: string): FileReport | undefined {
  const wanted = slashPath(filePath);
  return outcome.reports.find((r) => slashPath(r.path) === wanted || r.absPath === filePath);
}
