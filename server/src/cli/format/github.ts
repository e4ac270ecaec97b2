// GitHub Actions workflow commands (`::error file=…,line=…::message`), which become annotations on the pull request.
import type { Severity } from '../../engine/finding';
import type { CliNote } from '../files';
import { type CheckOutcome, placedFindings, slashPath } from './common';

/** Escapes the message part of a workflow command. */
export function escapeData(text: string): string {
  return text.replace(/%/g, '%25').replace(/\r/g, '%0D').replace(/\n/g, '%0A');
}

/** Escapes a property value of a workflow command (also `:` and `,`). */
export function escapeProperty(text: string): string {
  return escapeData(text).replace(/:/g, '%3A').replace(/,/g, '%2C');
}

function commandFor(severity: Severity): 'error' | 'warning' | 'notice' {
  if (severity === 'error') return 'error';
  if (severity === 'warning') return 'warning';
  return 'notice';
}

function noteCommand(level: CliNote['level']): 'error' | 'warning' | 'notice' {
  return level === 'info' ? 'notice' : level;
}

/**
 * The findings as workflow commands, one per line, then the notes. Notebook findings name the file without line
 * numbers (they would point into the JSON) and say the cell, line and column in the message instead.
 */
export function formatGithub(outcome: CheckOutcome): string {
  const lines: string[] = [];
  for (const { report, finding, range } of placedFindings(outcome)) {
    const file = escapeProperty(slashPath(report.path));
    const title = escapeProperty(`noisewise ${finding.rule}`);
    if (range.cell === undefined) {
      const props = `file=${file},line=${range.line},col=${range.column},endLine=${range.endLine},endColumn=${range.endColumn},title=${title}`;
      lines.push(`::${commandFor(finding.severity)} ${props}::${escapeData(finding.message)}`);
    } else {
      const message = `cell ${range.cell}, line ${range.line}, column ${range.column}: ${finding.message}`;
      lines.push(`::${commandFor(finding.severity)} file=${file},title=${title}::${escapeData(message)}`);
    }
  }
  for (const note of outcome.notes) {
    const message = note.kind === 'skipped' ? `skipped: ${note.message}` : note.message;
    lines.push(`::${noteCommand(note.level)} file=${escapeProperty(slashPath(note.path))},title=noisewise::${escapeData(message)}`);
  }
  return lines.length === 0 ? '' : `${lines.join('\n')}\n`;
}
