// `noisewise rules` (the table of every rule) and `noisewise explain RULE` (one rule's page in the terminal).
import type { RuleEntry } from './format/common';
import { severityWord } from './format/common';
import { palette } from './format/text';

/** The rules table: id, family, default severity, fix availability and title, one rule per line, sorted by id. */
export function formatRulesTable(rules: readonly RuleEntry[], options: { color: boolean }): string {
  const style = palette(options.color);
  const header = ['RULE', 'FAMILY', 'SEVERITY', 'FIX', 'TITLE'];
  const rows = [...rules]
    .sort((a, b) => (a.meta.id < b.meta.id ? -1 : a.meta.id > b.meta.id ? 1 : 0))
    .map(({ meta }) => [meta.id, meta.family, severityWord(meta.defaultSeverity), meta.fix, meta.title]);
  const widths = header.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i]!.length)));
  const line = (cells: string[]): string =>
    cells
      .map((c, i) => (i === cells.length - 1 ? c : c.padEnd(widths[i]!)))
      .join('  ')
      .trimEnd();
  const out = [style.bold(line(header)), ...rows.map(line)];
  out.push('', `${rules.length} rules. \`noisewise explain RULE\` prints a rule's page.`);
  return `${out.join('\n')}\n`;
}

/** The rule with this id, or undefined. */
export function findRule(rules: readonly RuleEntry[], id: string): RuleEntry | undefined {
  return rules.find((r) => r.meta.id === id);
}

/** A rule's Markdown page for the terminal: headings in bold when colour is on, otherwise the page as written. */
export function formatExplain(rule: RuleEntry, options: { color: boolean }): string {
  const style = palette(options.color);
  const text = rule.doc.endsWith('\n') ? rule.doc : `${rule.doc}\n`;
  if (!options.color) return text;
  let inCode = false;
  return text
    .split('\n')
    .map((line) => {
      if (/^\s*```/.test(line)) inCode = !inCode;
      if (!inCode && /^#{1,6}\s/.test(line)) return style.bold(line);
      return line;
    })
    .join('\n');
}
