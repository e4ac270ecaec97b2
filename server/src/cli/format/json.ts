// The JSON report: the findings contract scripts rely on, plus notes and a summary.
import type { CheckOutcome } from './common';
import { countBySeverity, isFixable, placedFindings, severityWord, slashPath, type SeverityWord } from './common';

/** One finding as the JSON contract spells it (`cell` only for notebooks; `figures` is an extra key). */
export interface JsonFinding {
  rule: string;
  severity: SeverityWord;
  path: string;
  line: number;
  column: number;
  endLine: number;
  endColumn: number;
  message: string;
  fixable: boolean;
  cell?: number;
  figures: { label: string; value: number | string; source?: string }[];
}

/** The whole JSON document. */
export interface JsonReport {
  findings: JsonFinding[];
  notes: { path: string; level: 'error' | 'warning' | 'info'; message: string }[];
  summary: {
    files: number;
    findings: number;
    bySeverity: Record<SeverityWord, number>;
    fixable: number;
    fixed: number;
  };
}

/** Builds the JSON document of a check run. */
export function jsonReport(outcome: CheckOutcome): JsonReport {
  const placed = placedFindings(outcome);
  const findings = placed.map(({ report, finding, range }): JsonFinding => {
    const out: JsonFinding = {
      rule: finding.rule,
      severity: severityWord(finding.severity),
      path: slashPath(report.path),
      ...(range.cell === undefined ? {} : { cell: range.cell }),
      line: range.line,
      column: range.column,
      endLine: range.endLine,
      endColumn: range.endColumn,
      message: finding.message,
      fixable: isFixable(finding),
      figures: finding.figures.map((f) => (f.source === undefined ? { label: f.label, value: f.value } : { label: f.label, value: f.value, source: f.source })),
    };
    return out;
  });
  return {
    findings,
    notes: outcome.notes.map((n) => ({ path: slashPath(n.path), level: n.level, message: n.kind === 'skipped' ? `skipped: ${n.message}` : n.message })),
    summary: {
      files: outcome.filesChecked,
      findings: findings.length,
      bySeverity: countBySeverity(placed),
      fixable: findings.filter((f) => f.fixable).length,
      fixed: outcome.fixesApplied,
    },
  };
}

/** The JSON report as text (two-space indent, final newline). */
export function formatJson(outcome: CheckOutcome): string {
  return `${JSON.stringify(jsonReport(outcome), null, 2)}\n`;
}
