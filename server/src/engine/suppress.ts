// Suppression comments: `# noisewise: allow[RULE-ID] reason` on the flagged line or the line above it, and
// `# noisewise: allow-file[RULE-ID] reason` anywhere in the file. Reasons are required (a rule reports the missing ones).
import { LineIndex } from '../parse/positions';
import type { SyntaxFile, SyntaxNode } from '../parse/syntax';

/** One parsed suppression comment. */
export interface Suppression {
  scope: 'line' | 'file';
  rules: string[];
  reason: string;
  comment: SyntaxNode;
  /** 0-based lines of the analysed text this comment covers (line scope only). */
  lines: number[];
}

/** The pattern of a suppression comment (the comment's whole text). */
export const SUPPRESSION_PATTERN = /^#\s*noisewise:\s*(allow|allow-file)\s*\[([^\]]*)\]\s*(.*)$/;

/** Parses one comment node; null when it is not a suppression. */
export function parseSuppression(comment: SyntaxNode, lines: LineIndex): Suppression | null {
  const match = SUPPRESSION_PATTERN.exec(comment.text.trim());
  if (!match) return null;
  const rules = match[2]!
    .split(',')
    .map((r) => r.trim())
    .filter(Boolean);
  const reason = match[3]!.trim();
  const line = lines.lineOf(comment.start);
  const lineStart = lines.lineStarts[line]!;
  // A comment alone on its line covers the next line; a trailing comment covers its own line.
  const alone = lines.text.slice(lineStart, comment.start).trim() === '';
  return { scope: match[1] === 'allow-file' ? 'file' : 'line', rules, reason, comment, lines: alone ? [line, line + 1] : [line] };
}

/** All suppressions of a file. */
export function collectSuppressions(syntax: SyntaxFile, lines: LineIndex): Suppression[] {
  const out: Suppression[] = [];
  for (const node of syntax.nodes) {
    if (node.type !== 'comment') continue;
    const s = parseSuppression(node, lines);
    if (s) out.push(s);
  }
  return out;
}

/** True when a finding of `rule` starting on `line` is suppressed. */
export function isSuppressed(suppressions: Suppression[], rule: string, line: number): boolean {
  for (const s of suppressions) {
    if (!s.rules.includes(rule)) continue;
    if (s.scope === 'file' || s.lines.includes(line)) return true;
  }
  return false;
}
