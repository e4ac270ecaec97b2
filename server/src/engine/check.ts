// The life of a check: files into the workspace index, then per file one walk over the syntax that dispatches to
// every enabled rule, then suppressions and configured severities. Pure and in-memory: front ends do the IO.
import * as path from 'node:path';
import { allRules, type RegisteredRule } from '../../../rules/index';
import { createParser, initParser } from '../parse/parser';
import { LineIndex } from '../parse/positions';
import type { SyntaxNode } from '../parse/syntax';
import { Semantics } from '../semantic/queries';
import { type FileAnalysis, Workspace, type WorkspaceFile } from '../semantic/workspace';
import type { RuleContext, RuleListeners } from './api';
import { BudgetExceededError, DEFAULT_FILE_BUDGET_MS, Deadline, formatSeconds } from './budget';
import { type Finding, type Severity, SEVERITY_RANK, type TextEdit } from './finding';
import { collectSuppressions, isSuppressed } from './suppress';
import { type FileSummaryKind, prepareSummaries } from './summaries';
import type { CheckInput, EngineSettings, FileNote, FileReport, RuleSelection } from './types';

/** Names that mean "number of training examples" before `dataset-size-names` adds more (RULES.md). */
export const DEFAULT_DATASET_SIZE_NAMES = ['n_train', 'num_train', 'n_training', 'num_training', 'ntrain', 'train_size', 'training_size', 'dataset_size', 'data_size', 'num_examples', 'n_examples', 'n_data', 'num_data', 'n_samples_train', 'num_train_examples', 'num_samples', 'n_samples', 'N', 'N_train', 'N_TRAIN', 'NUM_TRAIN', 'NUM_TRAIN_EXAMPLES', 'DATASET_SIZE', 'TRAIN_SIZE'];

let sharedParser: ReturnType<typeof createParser> | undefined;

/** The process-wide parser (tree-sitter parsers are reusable and not thread-bound). */
export async function getParser(): Promise<ReturnType<typeof createParser>> {
  await initParser();
  sharedParser ??= createParser();
  return sharedParser;
}

/** Options of a check. */
export interface CheckOptions {
  workspaceRoot: string;
  settingsFor(absPath: string): EngineSettings;
  rules?: RuleSelection;
  /** Milliseconds each rule may spend on one file before its partial findings are kept with a note (default 30 s). */
  budgetMs?: number;
}

/** Limits of one file's check. */
export interface CheckLimits {
  /** Milliseconds each rule may spend on the file (DEFAULT_FILE_BUDGET_MS when omitted); see engine/budget.ts. */
  budgetMs?: number;
  /** The clock, in milliseconds (tests pass a fake one). */
  now?: () => number;
}

/** Checks files as one workspace (imports between them resolve) and returns one report per input, in input order. */
export async function checkSources(inputs: CheckInput[], options: CheckOptions): Promise<FileReport[]> {
  const parser = await getParser();
  const workspace = new Workspace(path.resolve(options.workspaceRoot), () => parser);
  for (const input of inputs) workspace.setFile(input);
  prepareSummaries(workspace, inputs.map((input) => path.resolve(input.absPath)), summaryKinds(options.rules), options.budgetMs ?? DEFAULT_FILE_BUDGET_MS);
  return inputs.map((input) => checkFile(workspace, path.resolve(input.absPath), options.settingsFor(input.absPath), options.rules, { budgetMs: options.budgetMs }));
}

/** The per-file summaries the selected rules read (see engine/summaries.ts). */
export function summaryKinds(selection?: RuleSelection): FileSummaryKind<unknown>[] {
  const out: FileSummaryKind<unknown>[] = [];
  for (const rule of allRules) {
    const id = rule.meta.id;
    if (selection?.only && selection.only.length > 0 && !selection.only.includes(id)) continue;
    if (selection?.skip?.includes(id)) continue;
    out.push(...(rule.summaries ?? []));
  }
  return out;
}

/** The rules that run for a selection and settings, with their effective severities. */
export function enabledRules(settings: EngineSettings, selection?: RuleSelection): { rule: RegisteredRule; severity: Severity }[] {
  const out: { rule: RegisteredRule; severity: Severity }[] = [];
  for (const rule of allRules) {
    const id = rule.meta.id;
    if (selection?.only && selection.only.length > 0 && !selection.only.includes(id)) continue;
    if (selection?.skip?.includes(id)) continue;
    const configured = settings.severity[id];
    if (configured === 'off') continue;
    const severity: Severity = configured === undefined ? rule.meta.defaultSeverity : configured === 'info' ? 'information' : configured;
    out.push({ rule, severity });
  }
  return out;
}

/**
 * Checks one file of a workspace. Rules that throw are contained to this file; so is a failure while building the
 * file's syntax or semantic model (the report then has one internal-error finding and a note). A file whose analysis
 * outlasts its budget yields the findings made so far and a `budget` note.
 */
export function checkFile(workspace: Workspace, absPath: string, settings: EngineSettings, selection?: RuleSelection, limits: CheckLimits = {}): FileReport {
  const entry = workspace.file(absPath);
  if (!entry) throw new Error(`noisewise: ${absPath} is not part of the workspace`);
  // Between file checks (never during one) the workspace may drop analyses it holds beyond its cache limit.
  workspace.trimCache();
  let analysis: FileAnalysis | null;
  try {
    analysis = workspace.analysis(absPath);
  } catch (error) {
    // Contained to this file: the rest of the run goes on.
    return failedReport(entry, `noisewise could not analyse this file: ${describe(error)}`);
  }
  if (!analysis) throw new Error(`noisewise: ${absPath} is not part of the workspace`);
  if (analysis.failure) return failedReport(entry, analysis.failure);
  const file = analysis.file;
  const notes: FileNote[] = [];
  const base: Omit<FileReport, 'findings' | 'notes'> = { path: file.path, absPath: file.absPath, kind: file.kind, text: analysis.text, notebook: analysis.notebook };
  if (analysis.unreadable) {
    notes.push({ level: 'warning', kind: 'skipped', message: analysis.unreadable });
    return { ...base, findings: [], notes };
  }
  if (analysis.syntax.errors.length > 0) {
    const first = analysis.syntax.errors[0]!;
    const where = LineIndex.of(analysis.text).toCli(first.start);
    notes.push({ level: 'info', kind: 'syntax', message: `${analysis.syntax.errors.length} syntax error(s), the first at line ${where.line}; the rest of the file was still analysed` });
  }
  let findings: Finding[];
  try {
    // The clock starts after parsing and building the model, which take time in proportion to the file's size.
    findings = runRules(workspace, analysis, settings, selection, notes, new Deadline(limits.budgetMs ?? DEFAULT_FILE_BUDGET_MS, limits.now));
  } catch (error) {
    // A failure outside the rules' listeners (suppressions, sorting …) is contained to this file too.
    workspace.memo.clear();
    return failedReport(entry, `noisewise could not finish checking this file: ${describe(error)}`, analysis);
  }
  return { ...base, findings, notes };
}

/** The report of a file whose check failed outside the rules: one internal-error finding and a note. */
function failedReport(file: WorkspaceFile, message: string, analysis?: FileAnalysis): FileReport {
  const finding: Finding = { rule: 'internal-error', severity: 'error', path: file.path, start: 0, end: 0, message, messageId: 'internal-error', figures: [], fixes: [], related: [] };
  return {
    path: file.path,
    absPath: file.absPath,
    kind: file.kind,
    text: analysis?.text ?? '',
    notebook: analysis?.notebook ?? null,
    findings: [finding],
    notes: [{ level: 'error', kind: 'internal', message }],
  };
}

function runRules(workspace: Workspace, analysis: FileAnalysis, settings: EngineSettings, selection: RuleSelection | undefined, notes: FileNote[], deadline: Deadline): Finding[] {
  const sem = new Semantics(workspace, analysis, deadline);
  const lines = LineIndex.of(analysis.text);
  const datasetSizeNames = [...DEFAULT_DATASET_SIZE_NAMES, ...settings.datasetSizeNames];
  const pathOfNode = (node: SyntaxNode): string => workspace.analysisOfNode(node)?.file.path ?? analysis.file.path;
  const active = enabledRules(settings, selection);
  const perRule = new Map<string, Finding[]>();
  const failed = new Map<string, string>();
  const dispatch = new Map<string, { id: string; fn: (node: SyntaxNode) => void }[]>();
  const finishers: { id: string; fn: () => void }[] = [];

  for (const { rule, severity } of active) {
    const id = rule.meta.id;
    const found: Finding[] = [];
    perRule.set(id, found);
    const context: RuleContext = {
      sem,
      settings: { datasetSizeNames },
      report(options) {
        const template = rule.meta.messages[options.messageId];
        if (template === undefined) throw new Error(`rule ${id} has no message '${options.messageId}'`);
        const message = template.replace(/\{(\w+)\}/g, (m, key: string) => (options.data && key in options.data ? String(options.data[key]) : m));
        if (options.node.file !== analysis.syntax) throw new Error(`rule ${id} reported a node of another file`);
        // A per-finding severity may only lower the rule's effective (configured or default) severity.
        const findingSeverity = options.severity !== undefined && SEVERITY_RANK[options.severity] < SEVERITY_RANK[severity] ? options.severity : severity;
        found.push({
          rule: id,
          severity: findingSeverity,
          path: analysis.file.path,
          start: options.node.start,
          end: options.node.end,
          message,
          messageId: options.messageId,
          figures: options.figures ?? [],
          fixes: (options.fixes ?? []).map((f) => ({ ...f, edits: f.edits.map((e) => (e.path === analysis.file.path ? { ...e, path: undefined } : e)) })),
          related: options.related ?? [],
        });
      },
      replace: (node, newText): TextEdit => ({ path: pathOfNode(node), start: node.start, end: node.end, newText }),
      replaceRange: (inFileOf, start, end, newText): TextEdit => ({ path: pathOfNode(inFileOf), start, end, newText }),
      related: (node, message) => ({ path: pathOfNode(node), start: node.start, end: node.end, message }),
      checkBudget: () => deadline.check(),
    };
    let listeners: RuleListeners;
    try {
      listeners = rule.create(context);
    } catch (error) {
      failed.set(id, describe(error));
      continue;
    }
    for (const [type, fn] of Object.entries(listeners)) {
      if (!fn) continue;
      if (type === 'file:end') finishers.push({ id, fn: fn as () => void });
      else {
        const list = dispatch.get(type) ?? [];
        list.push({ id, fn: fn as (node: SyntaxNode) => void });
        dispatch.set(type, list);
      }
    }
  }

  // One walk: the node array is in preorder, so a linear scan visits parents before children. The budget is checked
  // here and inside the semantic queries rules call: a rule that spends its own budget stops (its findings so far
  // stay) while the others go on; when the file's time is up, every rule stops.
  const stopped = new Map<string, SyntaxNode>();
  let fileStoppedAt: SyntaxNode | null = null;
  // The listener and its node are passed separately: no closure is made per node and listener.
  const call = (id: string, at: SyntaxNode, fn: (node: SyntaxNode) => void): void => {
    deadline.enter(id);
    try {
      fn(at);
    } catch (error) {
      if (error instanceof BudgetExceededError) stopped.set(id, at);
      else {
        failed.set(id, describe(error));
        // A query may have left a provisional memo entry behind: forget them all rather than trust one.
        workspace.memo.clear();
      }
    } finally {
      deadline.leave();
    }
    if (!stopped.has(id) && deadline.ruleSpent(id)) stopped.set(id, at);
  };
  walk: for (const node of analysis.syntax.nodes) {
    const listeners = dispatch.get(node.type);
    if (!listeners) continue;
    for (const { id, fn } of listeners) {
      if (failed.has(id) || stopped.has(id)) continue;
      if (deadline.fileSpent()) {
        fileStoppedAt = node;
        break walk;
      }
      call(id, node, fn);
    }
  }
  for (const { id, fn } of finishers) {
    if (fileStoppedAt !== null || failed.has(id) || stopped.has(id)) continue;
    if (deadline.fileSpent()) {
      fileStoppedAt = analysis.syntax.root;
      break;
    }
    call(id, analysis.syntax.root, fn);
  }
  if (fileStoppedAt !== null || stopped.size > 0) {
    // Queries interrupted half-way may have left provisional memo entries; later files must not see them.
    workspace.memo.clear();
    const where = (node: SyntaxNode): string => (node === analysis.syntax.root ? 'before its end-of-file checks' : `at line ${lines.toCli(node.start).line}`);
    const parts: string[] = [];
    if (stopped.size > 0) {
      const list = [...stopped].sort((a, b) => (a[0] < b[0] ? -1 : 1)).map(([id, node]) => `${id} ${where(node)}`);
      parts.push(`${stopped.size === 1 ? 'rule' : 'rules'} ${list.join(', ')} stopped after the time budget of ${formatSeconds(deadline.budgetMs)} per rule`);
    }
    if (fileStoppedAt !== null) parts.push(`every rule stopped ${where(fileStoppedAt)} after the file's time limit of ${formatSeconds(deadline.fileLimitMs)}`);
    notes.push({ level: 'warning', kind: 'budget', message: `analysis cut short: ${parts.join('; ')}; findings later in the file may be missing` });
  }

  const suppressions = collectSuppressions(analysis.syntax, lines);
  const out: Finding[] = [];
  for (const { rule, severity } of active) {
    const id = rule.meta.id;
    const error = failed.get(id);
    if (error !== undefined) {
      notes.push({ level: 'error', kind: 'internal', message: `rule ${id} failed on this file: ${error}` });
      out.push({ rule: id, severity: severity === 'hint' ? 'information' : severity, path: analysis.file.path, start: 0, end: 0, message: `internal error in rule ${id}; its findings for this file are left out: ${error}`, messageId: 'internal-error', figures: [], fixes: [], related: [] });
      continue;
    }
    const seen = new Set<string>();
    for (const f of perRule.get(id) ?? []) {
      const key = `${f.start}:${f.end}:${f.messageId}:${f.message}`;
      if (seen.has(key)) continue;
      seen.add(key);
      if (isSuppressed(suppressions, id, lines.lineOf(f.start))) continue;
      out.push(f);
    }
  }
  out.sort((a, b) => a.start - b.start || a.end - b.end || (a.rule < b.rule ? -1 : a.rule > b.rule ? 1 : 0) || (a.message < b.message ? -1 : 1));
  return out;
}

function describe(error: unknown): string {
  if (error instanceof Error) return error.message;
  return String(error);
}
