// Turns a file's findings into LSP diagnostics, grouped by the document they belong to (the file, or each notebook
// cell): source `noisewise`, code = rule id, a link to the rule page, severity, tags and related locations.
import { type Diagnostic, DiagnosticSeverity, DiagnosticTag, type DiagnosticRelatedInformation } from 'vscode-languageserver';
import type { Finding, Severity } from '../engine/finding';
import type { FileView } from './ranges';

/** The `source` of every diagnostic. */
export const DIAGNOSTIC_SOURCE = 'noisewise';

const SEVERITY: Record<Severity, DiagnosticSeverity> = {
  error: DiagnosticSeverity.Error,
  warning: DiagnosticSeverity.Warning,
  information: DiagnosticSeverity.Information,
  hint: DiagnosticSeverity.Hint,
};

/**
 * Findings whose code does nothing at all, shown faded (LSP's `Unnecessary` tag): a suppression comment that names
 * no rule, or only an unknown one, suppresses nothing.
 */
const UNNECESSARY: ReadonlyMap<string, ReadonlySet<string>> = new Map([['unexplained-allow', new Set(['unknownRule', 'emptyList'])]]);

/** What the conversion needs to know about the client and the rest of the workspace. */
export interface DiagnosticContext {
  /** Link to a rule's page. */
  href(ruleId: string): string;
  /** The view of another file, for related locations there (null when it cannot be shown). */
  viewOf(absPath: string): FileView | null;
  relatedInformation: boolean;
  codeDescription: boolean;
  /** Diagnostic tags the client understands. */
  tags: readonly DiagnosticTag[];
}

/** LSP severity of an engine severity. */
export function lspSeverity(severity: Severity): DiagnosticSeverity {
  return SEVERITY[severity];
}

/** One finding as a diagnostic, with the document it belongs to; null when its document is not open (closed notebooks). */
export function toDiagnostic(finding: Finding, view: FileView, context: DiagnosticContext): { uri: string; diagnostic: Diagnostic } | null {
  const at = view.location(finding.start, finding.end);
  if (!at) return null;
  const diagnostic: Diagnostic = {
    range: at.range,
    severity: lspSeverity(finding.severity),
    code: finding.rule,
    source: DIAGNOSTIC_SOURCE,
    message: finding.message,
  };
  if (context.codeDescription) diagnostic.codeDescription = { href: context.href(finding.rule) };
  if (UNNECESSARY.get(finding.rule)?.has(finding.messageId) && context.tags.includes(DiagnosticTag.Unnecessary)) diagnostic.tags = [DiagnosticTag.Unnecessary];
  if (context.relatedInformation && finding.related.length > 0) {
    const related: DiagnosticRelatedInformation[] = [];
    for (const r of finding.related) {
      const target = r.path === undefined || r.path === view.absPath ? view : context.viewOf(r.path);
      const location = target?.location(r.start, r.end);
      if (location) related.push({ location: { uri: location.ref.uri, range: location.range }, message: r.message });
    }
    if (related.length > 0) diagnostic.relatedInformation = related;
  }
  return { uri: at.ref.uri, diagnostic };
}

/** All findings of a file as diagnostics, per document URI; every document of the file has an entry (maybe empty). */
export function toDiagnostics(findings: readonly Finding[], view: FileView, context: DiagnosticContext): Map<string, Diagnostic[]> {
  const out = new Map<string, Diagnostic[]>();
  if (view.document) out.set(view.document.uri, []);
  for (const cell of view.cells ?? []) out.set(cell.uri, []);
  for (const finding of findings) {
    const converted = toDiagnostic(finding, view, context);
    if (!converted) continue;
    const list = out.get(converted.uri) ?? [];
    list.push(converted.diagnostic);
    out.set(converted.uri, list);
  }
  return out;
}
