// Test helpers that build a real workspace index from in-memory files and find syntax nodes in it by their text.
import * as path from 'node:path';
import { getParser } from '../../server/src/engine/check';
import type { SyntaxNode } from '../../server/src/parse/syntax';
import { Semantics } from '../../server/src/semantic/queries';
import { type FileAnalysis, Workspace } from '../../server/src/semantic/workspace';

/** A workspace built from in-memory files, with shortcuts keyed by workspace-relative paths. */
export interface TestWorkspace {
  workspace: Workspace;
  root: string;
  /** Absolute path of a workspace-relative path. */
  abs(relative: string): string;
  /** The analysis of a file (fails the test when the file is unknown). */
  analysis(relative: string): FileAnalysis;
  /** Semantic queries from the point of view of a file. */
  sem(relative: string): Semantics;
  /** Adds or replaces a file; returns what `Workspace.setFile` returns. */
  set(relative: string, text: string): boolean;
}

/** The virtual root that test workspaces live under (never read from disk). */
export const VIRTUAL_ROOT = path.resolve('/virtual/river-lab');

/**
 * Builds a workspace from files keyed by path relative to the root (forward slashes); `cacheLimit` bounds the
 * number of analyses kept in memory (the workspace's own default when omitted).
 */
export async function buildWorkspace(files: Record<string, string>, options: { root?: string; cacheLimit?: number } = {}): Promise<TestWorkspace> {
  const parser = await getParser();
  const root = options.root ?? VIRTUAL_ROOT;
  const workspace = options.cacheLimit === undefined ? new Workspace(root, () => parser) : new Workspace(root, () => parser, options.cacheLimit);
  const abs = (relative: string) => path.join(root, ...relative.split('/'));
  const set = (relative: string, text: string) => workspace.setFile({ path: relative, absPath: abs(relative), text });
  for (const [relative, text] of Object.entries(files)) set(relative, text);
  const analysis = (relative: string): FileAnalysis => {
    const found = workspace.analysis(abs(relative));
    if (!found) throw new Error(`test workspace has no file ${relative}`);
    return found;
  };
  return { workspace, root, abs, analysis, sem: (relative) => new Semantics(workspace, analysis(relative)), set };
}

/**
 * The `occurrence`-th node (0-based, in preorder) of a type whose source text is exactly `text`; fails the test with
 * a clear message when there is no such node.
 */
export function nodeOf(analysis: FileAnalysis, type: string, text: string, occurrence = 0): SyntaxNode {
  const matches = analysis.syntax.nodes.filter((n) => n.type === type && n.text === text);
  const found = matches[occurrence];
  if (!found) throw new Error(`no ${type} \`${text}\` #${occurrence} in ${analysis.file.path} (found ${matches.length})`);
  return found;
}

/** The identifier `name` on the first line that contains `lineText` (exact substring), at its `occurrence` on that line. */
export function identifierOn(analysis: FileAnalysis, lineText: string, name: string, occurrence = 0): SyntaxNode {
  const text = analysis.text;
  const at = text.indexOf(lineText);
  if (at < 0) throw new Error(`no line containing \`${lineText}\` in ${analysis.file.path}`);
  const lineStart = text.lastIndexOf('\n', at) + 1;
  const lineEnd = text.indexOf('\n', at) < 0 ? text.length : text.indexOf('\n', at);
  const matches = analysis.syntax.nodes.filter((n) => n.type === 'identifier' && n.text === name && n.start >= lineStart && n.end <= lineEnd);
  const found = matches[occurrence];
  if (!found) throw new Error(`no identifier \`${name}\` #${occurrence} on the line \`${lineText}\` (found ${matches.length})`);
  return found;
}

/** The line (1-based) of an offset in a text, for readable assertions. */
export function lineOf(text: string, offset: number): number {
  let line = 1;
  for (let i = 0; i < offset && i < text.length; i++) if (text.charCodeAt(i) === 10) line++;
  return line;
}

/** A notebook file as nbformat writes it (one-space indent, list sources, trailing newline); `source` strings are split into lines. */
export function notebookJson(cells: { type: 'code' | 'markdown'; source: string }[]): string {
  const doc = {
    cells: cells.map((c, i) => {
      const source = c.source === '' ? [] : c.source.split(/(?<=\n)/);
      return c.type === 'code' ? { cell_type: 'code', execution_count: null, id: `cell-${i}`, metadata: {}, outputs: [], source } : { cell_type: 'markdown', id: `cell-${i}`, metadata: {}, source };
    }),
    metadata: { kernelspec: { display_name: 'Python 3', language: 'python', name: 'python3' }, language_info: { name: 'python' } },
    nbformat: 4,
    nbformat_minor: 5,
  };
  return `${JSON.stringify(doc, null, 1)}\n`;
}
