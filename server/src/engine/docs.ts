// Rule pages: the rule's own doc.md with a header generated from its metadata (family, severity, status, fixes,
// settings). The same text is bundled for `noisewise explain`, hovers, and written to docs/rules/.
import type { Rule } from './api';

/** Headings every rule page has, in this order. */
export const RULE_PAGE_HEADINGS = ['What it catches', 'Why it matters (with the numbers)', 'Flagged', 'Preferred', 'Fix', 'When it stays quiet', 'Settings', 'Further reading'];

const SEVERITY_WORD: Record<string, string> = { error: 'error', warning: 'warning', information: 'info', hint: 'hint' };

/** The full rule page: title line, generated header, then the page body after its title. */
export function renderRulePage(rule: Rule & { doc: string }): string {
  const meta = rule.meta;
  const lines = rule.doc.replace(/\r\n/g, '\n').split('\n');
  const title = lines[0]!.startsWith('# ') ? lines.shift()! : `# ${meta.id}: ${meta.title}`;
  const body = lines.join('\n').replace(/^\n+/, '');
  const fix = meta.fix === 'none' ? 'no automatic fix' : meta.fix === 'always' ? 'a fix for every finding' : 'fixes for some findings';
  const header = [
    `| | |`,
    `|---|---|`,
    `| Family | ${meta.family} |`,
    `| Default severity | ${SEVERITY_WORD[meta.defaultSeverity]} |`,
    `| Status | ${meta.status.stage} since ${meta.status.since} |`,
    `| Fixes | ${fix} |`,
    `| Settings | ${meta.settings.length ? meta.settings.map((s) => `\`${s}\``).join(', ') : 'none'} |`,
  ].join('\n');
  return `${title}\n\n${header}\n\n${body.trimEnd()}\n`;
}

/** The index page of all rules. */
export function renderRuleIndex(rules: readonly Rule[]): string {
  const rows = rules.map((r) => `| [${r.meta.id}](${r.meta.id}.md) | ${r.meta.family} | ${SEVERITY_WORD[r.meta.defaultSeverity]} | ${r.meta.fix} | ${r.meta.title} |`);
  return ['# noisewise rules', '', 'Generated from the rules\' metadata and pages; run `npm run gen-docs` after changing a rule.', '', '| Rule | Family | Default severity | Fix | Title |', '|---|---|---|---|---|', ...rows, ''].join('\n');
}

/** The sections of a rule page body by heading (level-2 headings). */
export function pageSections(doc: string): Map<string, string> {
  const out = new Map<string, string>();
  let current: string | null = null;
  let buffer: string[] = [];
  for (const line of doc.replace(/\r\n/g, '\n').split('\n')) {
    const m = /^## (.+)$/.exec(line);
    if (m) {
      if (current !== null) out.set(current, buffer.join('\n'));
      current = m[1]!.trim();
      buffer = [];
    } else if (current !== null) buffer.push(line);
  }
  if (current !== null) out.set(current, buffer.join('\n'));
  return out;
}

/** Fenced Python code blocks of a Markdown section. */
export function pythonBlocks(section: string): string[] {
  const out: string[] = [];
  const re = /```python\n([\s\S]*?)```/g;
  for (let m = re.exec(section); m; m = re.exec(section)) out.push(m[1]!);
  return out;
}
