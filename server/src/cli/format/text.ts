// The human-readable report: one line per finding (`path:line:col: severity [rule] message`), its figures, and a summary.
import type { Figure } from '../../engine/finding';
import type { CliNote } from '../files';
import { type CheckOutcome, countBySeverity, isFixable, placedFindings, plural, type SeverityWord, severityWord, slashPath } from './common';

/** ANSI styling, or none. */
export interface Palette {
  bold(text: string): string;
  dim(text: string): string;
  severity(word: SeverityWord, text: string): string;
}

const ESC = '\u001b[';

/** A palette that adds ANSI colours (`color` true) or leaves text plain. */
export function palette(color: boolean): Palette {
  if (!color) return { bold: (t) => t, dim: (t) => t, severity: (_w, t) => t };
  const codes: Record<SeverityWord, string> = { error: '31;1', warning: '33;1', info: '36', hint: '2' };
  return {
    bold: (t) => `${ESC}1m${t}${ESC}22m`,
    dim: (t) => `${ESC}2m${t}${ESC}22m`,
    severity: (w, t) => `${ESC}${codes[w]}m${t}${ESC}0m`,
  };
}

/** Whether output should be coloured: a terminal, `NO_COLOR` unset or empty, and no `--no-color`. */
export function useColor(options: { isTTY: boolean; env: Record<string, string | undefined>; noColorFlag: boolean }): boolean {
  if (options.noColorFlag || !options.isTTY) return false;
  const noColor = options.env.NO_COLOR;
  return noColor === undefined || noColor === '';
}

/** A figure's value for reading: integers as they are, other numbers to six significant digits. */
export function formatFigureValue(value: number | string): string {
  if (typeof value === 'string') return value;
  if (!Number.isFinite(value) || Number.isInteger(value)) return String(value);
  return String(Number(value.toPrecision(6)));
}

function formatFigure(figure: Figure): string {
  return `${figure.label}: ${formatFigureValue(figure.value)}${figure.source ? ` (${figure.source})` : ''}`;
}

/** The report printed on standard output (or to --output) for `--format text`. */
export function formatText(outcome: CheckOutcome, options: { color: boolean }): string {
  const style = palette(options.color);
  const lines: string[] = [];
  const placed = placedFindings(outcome);
  for (const { report, finding, range } of placed) {
    const where = range.cell === undefined ? `${range.line}:${range.column}` : `cell ${range.cell}:${range.line}:${range.column}`;
    const word = severityWord(finding.severity);
    lines.push(`${style.bold(`${slashPath(report.path)}:${where}`)}: ${style.severity(word, word)} ${style.dim(`[${finding.rule}]`)} ${finding.message}`);
    for (const figure of finding.figures) lines.push(`    ${style.dim('·')} ${formatFigure(figure)}`);
  }
  if (placed.length > 0) lines.push('');
  lines.push(...summaryLines(outcome, placed.length, countBySeverity(placed), placed.filter((p) => isFixable(p.finding)).length));
  return `${lines.join('\n')}\n`;
}

function summaryLines(outcome: CheckOutcome, total: number, counts: Record<SeverityWord, number>, fixable: number): string[] {
  const lines: string[] = [];
  if (outcome.fixMode === 'fix' && outcome.fixesApplied > 0) {
    lines.push(`Fixed ${plural(outcome.fixesApplied, 'finding')} in ${plural(outcome.filesFixed, 'file')}.`);
  } else if (outcome.fixMode === 'diff' && outcome.fixesApplied > 0) {
    lines.push(`Would fix ${plural(outcome.fixesApplied, 'finding')} in ${plural(outcome.filesFixed, 'file')} (nothing was written).`);
  }
  const checked = `${plural(outcome.filesChecked, 'file')} checked`;
  const remain = outcome.fixMode === 'fix' ? ' remain' : outcome.fixMode === 'diff' ? ' would remain' : '';
  if (total === 0) {
    if (outcome.filesChecked === 0) lines.push('No Python files or notebooks were checked.');
    else lines.push(`No findings${remain}; ${checked}.`);
    return lines;
  }
  const parts = (['error', 'warning', 'info', 'hint'] as const)
    .filter((w) => counts[w] > 0)
    .map((w) => (w === 'info' || w === 'hint' ? `${counts[w]} ${w}` : plural(counts[w], w)));
  const filesWithFindings = outcome.reports.filter((r) => r.findings.length > 0).length;
  let line = `${plural(total, 'finding')}${remain} (${parts.join(', ')}) in ${plural(filesWithFindings, 'file')}; ${checked}`;
  if (fixable > 0 && outcome.fixMode === 'none') line += `; ${fixable} can be fixed with --fix`;
  lines.push(`${line}.`);
  return lines;
}

/** Notes as the text format prints them on standard error: `path: skipped: reason`. */
export function formatTextNotes(notes: readonly CliNote[]): string {
  return notes.map((n) => `${slashPath(n.path)}: ${n.kind}: ${n.message}\n`).join('');
}
