// Per-file summaries that rules declare: plain data computed once per file (and again only when the file or one it
// imports changes), kept by the workspace across cache trims. A rule that asks a workspace-wide question (is this
// tensor clamped in place anywhere?) reads every file's summary instead of analysing every file for every file it
// checks. Before a run checks files, `prepareSummaries` computes them file by file, trimming the cache in between,
// so that memory stays bounded however many files the workspace has.
import { Semantics } from '../semantic/queries';
import type { FileAnalysis, Workspace } from '../semantic/workspace';
import { Deadline } from './budget';

/** A kind of per-file summary: its name (unique across rules) and how to compute it from one file's analysis. */
export interface FileSummaryKind<T> {
  name: string;
  /** Must return plain data: no syntax nodes, classes or other objects of the analysis. */
  compute(sem: Semantics, analysis: FileAnalysis): T;
}

/** Declares a kind of summary (identity function that gives the literal its type). */
export function defineFileSummary<T>(kind: FileSummaryKind<T>): FileSummaryKind<T> {
  return kind;
}

/**
 * The summary of a file, computed now when it is missing (with the asking check's semantic queries, so the check's
 * budget applies). Null when the file is not part of the workspace.
 */
export function summaryOf<T>(sem: Semantics, kind: FileSummaryKind<T>, absPath: string): T | null {
  return sem.workspace.fileSummary(kind.name, absPath, (analysis) => kind.compute(sem.forFile(analysis), analysis));
}

/**
 * Computes the summaries of many files ahead of checking them, one file at a time, trimming the analysis cache in
 * between (this runs outside any file check, so no rule holds objects of an evicted file). Files are visited in
 * reverse order, so that the cache ends up holding the first files a check in order will ask for. A file whose
 * summary cannot be computed within the budget (or at all) gets none now; a check that needs it computes it then,
 * under that check's budget, and reports what happens.
 */
export function prepareSummaries(workspace: Workspace, absPaths: readonly string[], kinds: readonly FileSummaryKind<unknown>[], budgetMs: number): void {
  if (kinds.length === 0) return;
  for (let i = absPaths.length - 1; i >= 0; i--) {
    const absPath = absPaths[i]!;
    for (const kind of kinds) {
      try {
        workspace.fileSummary(kind.name, absPath, (analysis) => kind.compute(new Semantics(workspace, analysis, new Deadline(budgetMs)), analysis));
      } catch {
        // Left for the check of a file that needs it (see above); clear what the failed computation memoised.
        workspace.memo.clear();
      }
    }
    workspace.trimCache();
  }
}
