// The hover over a finding: the rule and its message, the figures computed for this code with their sources, the
// opening of the rule's explanation and the link to the full page.
import { type Hover, MarkupKind, type Range } from 'vscode-languageserver';
import type { RegisteredRule } from '../../../rules/index';
import { pageSections } from '../engine/docs';
import type { Finding } from '../engine/finding';

/** What a hover needs besides the findings. */
export interface HoverContext {
  rule(id: string): RegisteredRule | undefined;
  href(ruleId: string): string;
  /** Whether the client renders Markdown (otherwise plain text is sent). */
  markdown: boolean;
}

const SEVERITY_WORD: Record<string, string> = { error: 'error', warning: 'warning', information: 'info', hint: 'hint' };

/**
 * The opening of the rule page's "What it catches" section: its first paragraph, and the list that follows when the
 * paragraph introduces one (ends with a colon). Paragraph lines are joined; list items keep their own lines.
 */
export function ruleSummary(rule: RegisteredRule): string {
  const section = pageSections(rule.doc).get('What it catches') ?? '';
  const blocks = section.trim().split(/\n\s*\n/);
  const first = (blocks[0] ?? '').replace(/\s*\n\s*/g, ' ').trim();
  const next = blocks[1]?.trim() ?? '';
  if (first.endsWith(':') && /^[-*] /.test(next)) return `${first}\n\n${next}`;
  return first;
}

function cell(text: string): string {
  return text.replace(/\|/g, '\\|').replace(/\r?\n/g, ' ');
}

/** The Markdown of one finding's hover section. */
export function findingMarkdown(finding: Finding, context: HoverContext): string {
  const rule = context.rule(finding.rule);
  const parts = [`**noisewise** · \`${finding.rule}\` · ${SEVERITY_WORD[finding.severity] ?? finding.severity}`, '', finding.message];
  if (finding.figures.length > 0) {
    parts.push('', '| Figure for this code | Value | Source |', '|---|---|---|');
    for (const figure of finding.figures) parts.push(`| ${cell(figure.label)} | ${cell(String(figure.value))} | ${cell(figure.source ?? '')} |`);
  }
  if (rule) {
    const summary = ruleSummary(rule);
    if (summary) parts.push('', `*${rule.meta.title}.* ${summary}`);
  }
  parts.push('', `[Rule page: ${finding.rule}](${context.href(finding.rule)})`);
  return parts.join('\n');
}

/** The plain-text form of one finding's hover section. */
export function findingPlainText(finding: Finding, context: HoverContext): string {
  const rule = context.rule(finding.rule);
  const parts = [`noisewise [${finding.rule}] ${SEVERITY_WORD[finding.severity] ?? finding.severity}`, finding.message];
  for (const figure of finding.figures) parts.push(`  ${figure.label} = ${figure.value}${figure.source ? ` (${figure.source})` : ''}`);
  if (rule) {
    const summary = ruleSummary(rule);
    if (summary) parts.push(`${rule.meta.title}. ${summary}`);
  }
  parts.push(`Rule page: ${context.href(finding.rule)}`);
  return parts.join('\n');
}

/** The hover for the findings under the cursor (null when there are none). */
export function hoverFor(findings: readonly Finding[], range: Range | undefined, context: HoverContext): Hover | null {
  if (findings.length === 0) return null;
  const value = context.markdown
    ? findings.map((f) => findingMarkdown(f, context)).join('\n\n---\n\n')
    : findings.map((f) => findingPlainText(f, context)).join('\n\n');
  const hover: Hover = { contents: { kind: context.markdown ? MarkupKind.Markdown : MarkupKind.PlainText, value } };
  if (range) hover.range = range;
  return hover;
}
