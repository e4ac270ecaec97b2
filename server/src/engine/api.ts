// The only surface rules import: the rule definition types, the context a rule reports through, and the
// semantic model's query types. Rules do no IO and know nothing of LSP or the CLI.
import type { SyntaxNode } from '../parse/syntax';
import type { Semantics } from '../semantic/queries';
import type { Figure, Fix, FixSafety, RelatedLocation, Severity, TextEdit } from './finding';
import type { RuleMeta } from './rule-meta';
import type { FileSummaryKind } from './summaries';

export type { SyntaxNode } from '../parse/syntax';
export { firstAtLeast } from '../parse/sorted';
export type { Binding, ClassInfo, FunctionInfo, Scope } from '../semantic/module';
export { assignedName, unwrapParens } from '../semantic/module';
export type { Callee, Origin, ResolvedSymbol, Semantics, ValueType } from '../semantic/queries';
export type { FileAnalysis } from '../semantic/workspace';
export type { FileSummaryKind } from './summaries';
export { defineFileSummary, summaryOf } from './summaries';
export { MODULE_BASES } from '../semantic/queries';
export type { ConstantValue } from '../semantic/values';
export { formatNumber } from '../semantic/values';
export type { Figure, Fix, FixSafety, RelatedLocation, Severity, TextEdit } from './finding';
export type { RuleFamily, RuleMeta, RuleStatus } from './rule-meta';

/** What a rule reports: where, which message (with data for its placeholders), the figures and the fixes. */
export interface ReportOptions {
  node: SyntaxNode;
  messageId: string;
  data?: Record<string, string | number>;
  figures?: Figure[];
  fixes?: Fix[];
  related?: RelatedLocation[];
  /**
   * A lower severity for this finding only (for example a milder form of the mistake). The finding gets the lower
   * of this and the rule's effective severity, so it never exceeds what the user configured; a rule configured
   * `off` does not run at all.
   */
  severity?: Severity;
}

/** Settings a rule may read. */
export interface RuleSettings {
  /** Names that mean "number of training examples" (defaults plus `dataset-size-names`). */
  datasetSizeNames: readonly string[];
}

/** What a rule gets while checking one file. */
export interface RuleContext {
  /** Semantic queries from the point of view of the checked file (they reach into other workspace files). */
  readonly sem: Semantics;
  readonly settings: RuleSettings;
  /** Reports a finding in the checked file. */
  report(options: ReportOptions): void;
  /** An edit that replaces a node's text (in whichever workspace file the node is). */
  replace(node: SyntaxNode, newText: string): TextEdit;
  /** An edit that replaces an offset range in the file that holds `inFileOf`. */
  replaceRange(inFileOf: SyntaxNode, start: number, end: number, newText: string): TextEdit;
  /** A location in whichever workspace file holds the node, for a finding's related information. */
  related(node: SyntaxNode, message: string): RelatedLocation;
  /**
   * Stops the rule (by throwing an error the engine catches) once the file's analysis budget is spent. Cheap enough
   * to call on every iteration of an expensive loop; the semantic queries already call it.
   */
  checkBudget(): void;
}

/** Node listeners keyed by tree-sitter node type; `file:end` runs after the walk. */
export type RuleListeners = { [nodeType: string]: ((node: SyntaxNode) => void) | undefined } & { 'file:end'?: () => void };

/** A rule: its metadata, a factory of listeners for one file, and the per-file summaries it reads. */
export interface Rule {
  meta: RuleMeta;
  create(context: RuleContext): RuleListeners;
  /** Summaries the rule reads of other files (see engine/summaries.ts); a run computes them before its checks. */
  summaries?: FileSummaryKind<unknown>[];
}

/** Declares a rule (identity function that gives the literal its type). */
export function defineRule(rule: Rule): Rule {
  return rule;
}

/** Builds a fix from edits. */
export function fix(title: string, safety: FixSafety, edits: TextEdit[]): Fix {
  return { title, safety, edits };
}
