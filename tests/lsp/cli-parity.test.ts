// The editor and CI agree: for every file of the demo workspace (Python files and the notebook, plus a file with
// non-ASCII text), the server's diagnostics equal `noisewise check --format json` — rule, severity, message and range
// (converted from UTF-16 characters to the CLI's 1-based code-point columns, per cell for notebooks).
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Diagnostic } from 'vscode-languageserver-protocol';
import { BIN, copyToTemp, type LspSession, REPO, startSession, uriOf } from './lsp-client';

interface CliFinding {
  rule: string;
  severity: string;
  path: string;
  line: number;
  column: number;
  endLine: number;
  endColumn: number;
  message: string;
  cell?: number;
}

const SEVERITY_WORD: Record<number, string> = { 1: 'error', 2: 'warning', 3: 'info', 4: 'hint' };

/** A diagnostic in the CLI's units: 1-based lines, 1-based columns counted in code points of the document's text. */
function asCli(diagnostic: Diagnostic, text: string, rel: string, cell?: number): CliFinding {
  const lines = text.split(/\r\n|\n|\r/);
  const column = (p: { line: number; character: number }): number => [...(lines[p.line] ?? '').slice(0, p.character)].length + 1;
  const out: CliFinding = {
    rule: String(diagnostic.code),
    severity: SEVERITY_WORD[diagnostic.severity!]!,
    path: rel,
    line: diagnostic.range.start.line + 1,
    column: column(diagnostic.range.start),
    endLine: diagnostic.range.end.line + 1,
    endColumn: column(diagnostic.range.end),
    message: String(diagnostic.message),
  };
  if (cell !== undefined) out.cell = cell;
  return out;
}

function key(f: CliFinding): string {
  return `${f.path}|${f.cell ?? ''}|${String(f.line).padStart(5, '0')}|${String(f.column).padStart(5, '0')}|${f.rule}|${f.message}`;
}

describe('server findings equal noisewise check --format json', () => {
  let root: string;
  let session: LspSession;
  let cli: CliFinding[];
  const server: CliFinding[] = [];
  let files: string[];

  beforeAll(async () => {
    root = copyToTemp(path.join(REPO, 'test-workspaces', 'river-lab'));
    // A file whose findings come after non-ASCII and non-BMP text on the same line.
    fs.writeFileSync(
      path.join(root, 'riverlab', 'gauge_notes.py'),
      [
        'import torch',
        'from torch import nn',
        '',
        '',
        'class PegelNoise(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.spread = nn.Parameter(torch.tensor(0.3))',
        '',
        '    def forward(self, x):',
        '        return x + len("Pegel 🌧 höhe") * 0 + self.spread * torch.randn_like(x)',
        '',
      ].join('\n'),
    );
    const run = spawnSync(process.execPath, [BIN, 'check', '.', '--format', 'json', '--exit-zero'], { cwd: root, encoding: 'utf8' });
    expect(run.status, run.stderr).toBe(0);
    cli = (JSON.parse(run.stdout).findings as CliFinding[]).map((f) => {
      const { rule, severity, path: p, line, column, endLine, endColumn, message, cell } = f;
      return cell === undefined ? { rule, severity, path: p, line, column, endLine, endColumn, message } : { rule, severity, path: p, line, column, endLine, endColumn, message, cell };
    });

    session = await startSession({ root });
    files = [];
    const walk = (dir: string): void => {
      for (const entry of fs.readdirSync(dir, { withFileTypes: true })) {
        const full = path.join(dir, entry.name);
        if (entry.isDirectory()) walk(full);
        else if (/\.(py|ipynb)$/.test(entry.name)) files.push(full);
      }
    };
    walk(root);
    for (const file of files.sort()) {
      const rel = path.relative(root, file).split(path.sep).join('/');
      const text = fs.readFileSync(file, 'utf8');
      if (file.endsWith('.py')) {
        session.open(uriOf(file), text);
        const published = await session.diagnosticsFor(uriOf(file), { version: 1 });
        for (const d of published.diagnostics) server.push(asCli(d, text, rel));
        continue;
      }
      const notebook = JSON.parse(text) as { cells: { cell_type: string; source: string | string[] }[] };
      const cellUris = notebook.cells.map((_, i) => `vscode-notebook-cell:${file}#cell${i}`);
      const sources = notebook.cells.map((c) => (Array.isArray(c.source) ? c.source.join('') : c.source));
      void session.connection.sendNotification('notebookDocument/didOpen', {
        notebookDocument: { uri: uriOf(file), notebookType: 'jupyter-notebook', version: 1, cells: notebook.cells.map((c, i) => ({ kind: c.cell_type === 'code' ? 2 : 1, document: cellUris[i] })) },
        cellTextDocuments: notebook.cells.flatMap((c, i) => (c.cell_type === 'code' ? [{ uri: cellUris[i], languageId: 'python', version: 1, text: sources[i] }] : [])),
      });
      for (let i = 0; i < notebook.cells.length; i++) {
        if (notebook.cells[i]!.cell_type !== 'code') continue;
        const published = await session.diagnosticsFor(cellUris[i]!, { version: 1 });
        for (const d of published.diagnostics) server.push(asCli(d, sources[i]!, rel, i));
      }
    }
  });

  afterAll(async () => {
    await session?.stop();
  });

  it('finds something in the demo workspace (the comparison is not vacuous)', () => {
    expect(cli.length).toBeGreaterThanOrEqual(4);
    expect(cli.some((f) => f.cell !== undefined)).toBe(true);
    expect(cli.some((f) => f.path === 'riverlab/gauge_notes.py')).toBe(true);
  });

  it('reports the same findings, file by file', () => {
    expect(server.map(key).sort()).toEqual(cli.map(key).sort());
    const byKey = new Map(cli.map((f) => [key(f), f]));
    for (const f of server) expect(f).toEqual(byKey.get(key(f)));
  });
});
