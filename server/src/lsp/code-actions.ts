// Code actions for findings: each fix as a quick fix (the first safe one preferred), "allow this finding here"
// (a suppression comment whose reason the user writes), and `source.fixAll.noisewise`, which applies every safe fix of
// a document the way `noisewise check --fix` does, in rounds until nothing changes.
import {
  type CodeAction,
  CodeActionKind,
  type Diagnostic,
  type TextDocumentEdit,
  type TextEdit as LspTextEdit,
  type WorkspaceEdit,
} from 'vscode-languageserver';
import { MAX_FIX_ROUNDS, planFixes, rewriteFile } from '../cli/fix';
import type { Finding, Fix } from '../engine/finding';
import { collectSuppressions } from '../engine/suppress';
import type { FileReport } from '../engine/types';
import type { SyntaxFile } from '../parse/syntax';
import { spanChange } from './documents';
import type { FileView } from './ranges';

/** The code action kind of "fix all" for noisewise. */
export const FIX_ALL_KIND = `${CodeActionKind.SourceFixAll}.noisewise`;

/** One edit in engine offsets of a file's analysed text. */
export interface FileEdit {
  absPath: string;
  start: number;
  end: number;
  newText: string;
}

/** What building workspace edits needs: views of the files edits touch, and the client's edit support. */
export interface EditContext {
  viewOf(absPath: string): FileView | null;
  /** Whether the client accepts `documentChanges` (versioned edits); otherwise `changes` is used. */
  documentChanges: boolean;
}

/** The line break a text uses first (edits that insert lines use it). */
function lineEndingOf(text: string): string {
  const match = /\r\n|\n|\r/.exec(text);
  return match ? match[0] : '\n';
}

/**
 * A workspace edit from engine edits; null when one of them cannot be shown to the editor (a notebook that is not
 * open, or an edit that would cross from one notebook cell into the next).
 */
export function toWorkspaceEdit(edits: readonly FileEdit[], context: EditContext): WorkspaceEdit | null {
  const byUri = new Map<string, { version: number | null; edits: LspTextEdit[] }>();
  for (const edit of edits) {
    const view = context.viewOf(edit.absPath);
    if (!view) return null;
    const at = view.location(edit.start, edit.end);
    if (!at) return null;
    const span = view.span(at.ref.uri);
    if (span && edit.end > span.end) return null;
    const eol = lineEndingOf(view.text);
    const newText = eol === '\n' ? edit.newText : edit.newText.replace(/\r\n|\r|\n/g, eol);
    const entry = byUri.get(at.ref.uri) ?? { version: at.ref.version, edits: [] };
    entry.edits.push({ range: at.range, newText });
    byUri.set(at.ref.uri, entry);
  }
  if (byUri.size === 0) return null;
  if (context.documentChanges) {
    const documentChanges: TextDocumentEdit[] = [...byUri].map(([uri, entry]) => ({ textDocument: { uri, version: entry.version }, edits: entry.edits }));
    return { documentChanges };
  }
  const changes: Record<string, LspTextEdit[]> = {};
  for (const [uri, entry] of byUri) changes[uri] = entry.edits;
  return { changes };
}

/** The engine edits of a fix, with each edit's file made explicit. */
export function fixEdits(fix: Fix, findingFile: string): FileEdit[] {
  return fix.edits.map((e) => ({ absPath: e.path ?? findingFile, start: e.start, end: e.end, newText: e.newText }));
}

/** Whether a code action kind is wanted by a request's `only` filter (a kind matches its own sub-kinds). */
export function kindWanted(kind: string, only: readonly string[] | undefined): boolean {
  if (!only || only.length === 0) return true;
  return only.some((o) => kind === o || kind.startsWith(`${o}.`));
}

/** The quick fixes of one finding: its fixes (first safe one preferred), then "allow this finding here". */
export function quickFixes(options: {
  finding: Finding;
  diagnostic: Diagnostic;
  absPath: string;
  view: FileView;
  syntax: SyntaxFile | null;
  context: EditContext;
}): CodeAction[] {
  const { finding, diagnostic } = options;
  const actions: CodeAction[] = [];
  const preferred = finding.fixes.find((f) => f.safety === 'safe');
  for (const fix of finding.fixes) {
    const edit = toWorkspaceEdit(fixEdits(fix, options.absPath), options.context);
    if (!edit) continue;
    const action: CodeAction = {
      title: fix.safety === 'safe' ? fix.title : `${fix.title} (review: changes how the model trains)`,
      kind: CodeActionKind.QuickFix,
      diagnostics: [diagnostic],
      edit,
    };
    if (fix === preferred) action.isPreferred = true;
    actions.push(action);
  }
  const allow = allowEdit(finding, options.absPath, options.view, options.syntax);
  if (allow) {
    const edit = toWorkspaceEdit([allow], options.context);
    if (edit) {
      actions.push({
        title: `Allow ${finding.rule} here (then write the reason after the inserted comment)`,
        kind: CodeActionKind.QuickFix,
        diagnostics: [diagnostic],
        edit,
      });
    }
  }
  return actions;
}

/**
 * The edit that suppresses a finding on its line: `# noisewise: allow[RULE-ID]` at the end of the line, the rule id
 * added to a suppression comment that already covers the line, or (when the line already ends in another comment) a
 * suppression comment on its own line above. No reason is written: the user types it after the closing bracket, and
 * until then `unexplained-allow` keeps pointing at the comment, so an unexplained suppression cannot slip through.
 * Null when the line ends inside a string, where a comment cannot go.
 */
export function allowEdit(finding: Finding, absPath: string, view: FileView, syntax: SyntaxFile | null): FileEdit | null {
  const lines = view.lines;
  const line = lines.lineOf(finding.start);
  const lineStart = lines.lineStarts[line]!;
  const lineEnd = lines.lineEnd(line);
  const text = view.text;
  const comment = `# noisewise: allow[${finding.rule}]`;
  if (syntax && syntax.text === text) {
    for (const suppression of collectSuppressions(syntax, lines)) {
      if (suppression.scope !== 'line' || !suppression.lines.includes(line) || suppression.rules.includes(finding.rule)) continue;
      const node = suppression.comment;
      const close = text.indexOf(']', node.start);
      if (close < 0 || close > node.end) continue;
      const inside = text.slice(text.indexOf('[', node.start) + 1, close).trim();
      return { absPath, start: close, end: close, newText: inside === '' ? finding.rule : `, ${finding.rule}` };
    }
    for (const node of syntax.nodes) {
      if (node.start >= lineEnd) break;
      if ((node.type === 'string' || node.type === 'concatenated_string') && node.start < lineEnd && node.end > lineEnd) return null;
    }
    const trailing = syntax.nodes.find((n) => n.type === 'comment' && n.start >= lineStart && n.start < lineEnd);
    const body = text.slice(lineStart, lineEnd);
    if (trailing || /\\\s*$/.test(body)) {
      const indent = /^[ \t]*/.exec(body)![0];
      return { absPath, start: lineStart, end: lineStart, newText: `${indent}${comment}\n` };
    }
  }
  let end = lineEnd;
  while (end > lineStart && (text[end - 1] === ' ' || text[end - 1] === '\t')) end--;
  return { absPath, start: end, end: lineEnd, newText: `  ${comment}` };
}

/**
 * The raw text (notebook JSON for notebooks) after applying every safe fix of a file, in rounds like `--fix`:
 * non-overlapping fixes whose edits all stay in this file are applied, the file is checked again through `recheck`,
 * and so on until a round changes nothing. Returns null when no safe fix applies.
 */
export function fixAllRaw(options: { report: FileReport; raw: string; recheck(raw: string): FileReport }): string | null {
  let report = options.report;
  let raw = options.raw;
  const lineEnding = lineEndingOf(report.kind === 'notebook' ? '' : report.text) as '\n' | '\r\n' | '\r';
  for (let round = 0; round < MAX_FIX_ROUNDS; round++) {
    const plan = planFixes([report], () => true);
    if (plan.length === 0) break;
    let next: string | null = null;
    try {
      next = rewriteFile(report, plan.flatMap((p) => p.edits.map((e) => e.edit)), { lineEnding });
    } catch {
      // Fixes that work alone but not together (or one that cannot apply): take the first that works this round.
      for (const planned of plan) {
        try {
          next = rewriteFile(report, planned.edits.map((e) => e.edit), { lineEnding });
          break;
        } catch {
          continue;
        }
      }
    }
    if (next === null || next === raw) break;
    raw = next;
    report = options.recheck(raw);
  }
  return raw === options.raw ? null : raw;
}

/** One edit per changed document: the span between the unchanged prefix and suffix of the old and new text. */
export function minimalEdit(view: FileView, uri: string, before: string, after: string): FileEdit | null {
  const span = view.span(uri);
  if (!span || before === after) return null;
  const change = spanChange(before, after);
  return { absPath: view.absPath, start: span.start + change.start, end: span.start + change.end, newText: change.newText };
}
