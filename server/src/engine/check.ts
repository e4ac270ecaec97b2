// The life of a check: files into the workspace index, then per file one walk over the syntax that dispatches to
// every enabled rule, then suppressions and configured severities. Pure and in-memory: front ends do the IO.
import * as path from 'node:path';
import { allRules, type RegisteredRule } from '../../../rules/index';
import { createParser, initParser } from '../parse/parser';
import { LineIndex } from '../parse/positions';
import type { SyntaxNode } from '../parse/syntax';
import { Semantics } from '../semantic/queries';
import { type FileAnalysis, Workspace } from '../semantic/workspace';
import type { RuleContext, RuleListeners } from './api';
import { type Finding, type Severity, SEVERITY_RANK, type TextEdit } from './finding';
import { collectSuppressions, isSuppressed } from './suppress';
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
}

/** Checks files as one workspace (imports between them resolve) and returns one report per input, in input order. */
export async function checkSources(inputs: CheckInput[], options: CheckOptions): Promise<FileReport[]> {
  const parser = await getParser();
  const workspace = new Workspace(path.resolve(options.workspaceRoot), () => parser);
  for (const input of inputs) workspace.setFile(input);
  return inputs.map((input) => checkFile(workspace, path.resolve(input.absPath), options.settingsFor(input.absPath), options.rules));
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

/** Checks one file of a workspace. Rules that throw are contained to this file. */
export function checkFile(workspace: Workspace, absPath: string, settings: EngineSettings, selection?: RuleSelection): FileReport {
  const analysis = workspace.analysis(absPath);
  if (!analysis) throw new Error(`noisewise: ${absPath} is not part of the workspace`);
  const file = analysis.file;
  const notes: FileNote[] = [];
  const base: Omit<FileReport, 'findings' | 'notes'> = { path: file.path, absPath: file.absPath, kind: file.kind, text: analysis.text, notebook: analysis.notebook };
  if (analysis.unreadable) {
    notes.push({ level: 'warning', kind: 'skipped', message: analysis.unreadable });
    return { ...base, findings: [], notes };
  }
  if (analysis.syntax.errors.length > 0) {
    const first = analysis.syntax.errors[0]!;
    const where = new LineIndex(analysis.text).toCli(first.start);
    notes.push({ level: 'info', kind: 'syntax', message: `${analysis.syntax.errors.length} syntax error(s), the first at line ${where.line}; the rest of the file was still analysed` });
  }
  const findings = runRules(workspace, analysis, settings, selection, notes);
  return { ...base, findings, notes };
}

function runRules(workspace: Workspace, analysis: FileAnalysis, settings: EngineSettings, selection: RuleSelection | undefined, notes: FileNote[]): Finding[] {
  const sem = new Semantics(workspace, analysis);
  const lines = new LineIndex(analysis.text);
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

  // One walk: the node array is in preorder, so a linear scan visits parents before children.
  for (const node of analysis.syntax.nodes) {
    const listeners = dispatch.get(node.type);
    if (!listeners) continue;
    for (const { id, fn } of listeners) {
      if (failed.has(id)) continue;
      try {
        fn(node);
      } catch (error) {
        failed.set(id, describe(error));
      }
    }
  }
  for (const { id, fn } of finishers) {
    if (failed.has(id)) continue;
    try {
      fn();
    } catch (error) {
      failed.set(id, describe(error));
    }
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
