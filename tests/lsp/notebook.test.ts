// Notebook document sync: the cells of a notebook are analysed together in cell order (a model class defined in one
// cell and misused in a later one), diagnostics land on the right cell, edits to one cell refresh the others, quick
// fixes edit the cells they concern, and closing the notebook clears its cells.
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CodeAction, PublishDiagnosticsParams, TextDocumentEdit } from 'vscode-languageserver-protocol';
import { applyLspEdits, type LspSession, startSession, tempWorkspace, textInRange, uriOf } from './lsp-client';

const CELLS: { kind: 1 | 2; text: string }[] = [
  { kind: 1, text: '# Stage forecast at Mill Weir\n\nOne gauge, rainfall windows of 24 h.' },
  { kind: 2, text: 'import torch\nfrom torch import nn\nfrom torch.distributions import Normal\n' },
  {
    kind: 2,
    text: [
      'class StageNet(nn.Module):',
      '    def __init__(self, n_in=24):',
      '        super().__init__()',
      '        self.out = nn.Linear(n_in, 1)',
      '        self.noise_std = nn.Parameter(torch.tensor(0.1))',
      '',
      '    def forward(self, x):',
      '        return self.out(x)',
      '',
    ].join('\n'),
  },
  { kind: 1, text: '## Training' },
  {
    kind: 2,
    text: [
      'model = StageNet()',
      'xb, yb = torch.randn(50, 24), torch.randn(50, 1)',
      'pred = model(xb)',
      'nll = -Normal(pred, model.noise_std).log_prob(yb).mean()',
      '',
    ].join('\n'),
  },
];

describe('a notebook with the model in cell 2 and its misuse in cell 4', () => {
  let session: LspSession;
  let notebookUri: string;
  let cellUris: string[];
  const texts = CELLS.map((c) => c.text);
  let version = 1;

  const cellDiagnostics = (index: number, since = 0): Promise<PublishDiagnosticsParams> => session.diagnosticsFor(cellUris[index]!, { since });

  beforeAll(async () => {
    const root = tempWorkspace({ 'notebooks/.keep': '' });
    notebookUri = uriOf(path.join(root, 'notebooks', 'stage_forecast.ipynb'));
    cellUris = CELLS.map((_, i) => `vscode-notebook-cell:${path.join(root, 'notebooks', 'stage_forecast.ipynb')}#cell${i}`);
    session = await startSession({ root });
    void session.connection.sendNotification('notebookDocument/didOpen', {
      notebookDocument: { uri: notebookUri, notebookType: 'jupyter-notebook', version, cells: CELLS.map((c, i) => ({ kind: c.kind, document: cellUris[i] })) },
      cellTextDocuments: CELLS.filter((c) => c.kind === 2).map((c) => ({ uri: cellUris[CELLS.indexOf(c)], languageId: 'python', version: 1, text: c.text })),
    });
  });

  afterAll(async () => {
    await session?.stop();
  });

  it('reports the finding on cell 4, over the offending expression', async () => {
    const cell4 = await cellDiagnostics(4);
    const found = cell4.diagnostics.filter((d) => d.code === 'unconstrained-std');
    expect(found).toHaveLength(1);
    expect(textInRange(texts[4]!, found[0]!.range)).toBe('model.noise_std');
    expect(found[0]!.range.start.line).toBe(3);
    expect(cell4.version).toBe(1);
    // The declaration in cell 2 is the related location.
    const related = found[0]!.relatedInformation![0]!;
    expect(related.location.uri).toBe(cellUris[2]);
    expect(textInRange(texts[2]!, related.location.range)).toBe('nn.Parameter(torch.tensor(0.1))');
    // Cells without findings get an empty list.
    expect((await cellDiagnostics(2)).diagnostics).toEqual([]);
  });

  it('offers a quick fix that edits the declaring cell and the using cell', async () => {
    const d = (await cellDiagnostics(4)).diagnostics.find((x) => x.code === 'unconstrained-std')!;
    const actions = (await session.connection.sendRequest('textDocument/codeAction', { textDocument: { uri: cellUris[4] }, range: d.range, context: { diagnostics: [d] } })) as CodeAction[];
    const preferred = actions.find((a) => a.isPreferred)!;
    const changes = preferred.edit!.documentChanges as TextDocumentEdit[];
    expect(changes.map((c) => c.textDocument.uri).sort()).toEqual([cellUris[2], cellUris[4]].sort());
    const cell2 = applyLspEdits(texts[2]!, changes.find((c) => c.textDocument.uri === cellUris[2])!.edits);
    const cell4 = applyLspEdits(texts[4]!, changes.find((c) => c.textDocument.uri === cellUris[4])!.edits);
    expect(cell2).toContain('self.log_noise_std = nn.Parameter(torch.tensor(-2.302585093))');
    expect(cell4).toContain('Normal(pred, model.log_noise_std.exp())');
  });

  it('hovers the finding in cell 4 with its figures', async () => {
    const d = (await cellDiagnostics(4)).diagnostics.find((x) => x.code === 'unconstrained-std')!;
    const hover = (await session.connection.sendRequest('textDocument/hover', { textDocument: { uri: cellUris[4] }, position: d.range.end })) as { contents: { value: string }; range: unknown };
    expect(hover.range).toEqual(d.range);
    // σ₀ = 0.1 in cell 2; check value from a general library (JavaScript's Math.log).
    expect(hover.contents.value).toContain(`| ${Math.log(0.1).toFixed(3)} |`);
  });

  it('fixes all safe findings of the notebook through source.fixAll.noisewise', async () => {
    const actions = (await session.connection.sendRequest('textDocument/codeAction', {
      textDocument: { uri: cellUris[4] },
      range: { start: { line: 0, character: 0 }, end: { line: 0, character: 0 } },
      context: { diagnostics: [], only: ['source.fixAll'] },
    })) as CodeAction[];
    expect(actions.map((a) => a.kind)).toEqual(['source.fixAll.noisewise']);
    const changes = actions[0]!.edit!.documentChanges as TextDocumentEdit[];
    expect(changes.map((c) => c.textDocument)).toEqual(
      expect.arrayContaining([
        { uri: cellUris[2], version: 1 },
        { uri: cellUris[4], version: 1 },
      ]),
    );
    const cell2 = applyLspEdits(texts[2]!, changes.find((c) => c.textDocument.uri === cellUris[2])!.edits);
    expect(cell2).toContain('self.log_noise_std = nn.Parameter(torch.tensor(-2.302585093))');
  });

  it('refreshes cell 4 when cell 2 changes (the class is no longer trainable there)', async () => {
    const since = session.pushed.length;
    version++;
    const line = texts[2]!.split('\n').findIndex((l) => l.includes('self.noise_std'));
    const lineText = texts[2]!.split('\n')[line]!;
    const newLine = '        self.noise_std = 0.1';
    texts[2] = texts[2]!.replace(lineText, newLine);
    void session.connection.sendNotification('notebookDocument/didChange', {
      notebookDocument: { uri: notebookUri, version },
      change: {
        cells: {
          textContent: [
            { document: { uri: cellUris[2], version: 2 }, changes: [{ range: { start: { line, character: 0 }, end: { line, character: lineText.length } }, text: newLine }] },
          ],
        },
      },
    });
    const cell4 = await session.waitFor('cell 4 without the finding', () => {
      const p = session.pushed.slice(since).find((x) => x.uri === cellUris[4]);
      return p && p.diagnostics.every((d) => d.code !== 'unconstrained-std') ? p : undefined;
    });
    expect(cell4.diagnostics).toEqual([]);
  });

  it('follows cells when the structure changes: a cell inserted before the training cell is analysed in its place', async () => {
    const since = session.pushed.length;
    version++;
    const newCellUri = cellUris[0]!.replace('#cell0', '#cell-new');
    const newText = 'class StageNet(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.noise_std = nn.Parameter(torch.ones(()))\n';
    void session.connection.sendNotification('notebookDocument/didChange', {
      notebookDocument: { uri: notebookUri, version },
      change: {
        cells: {
          structure: {
            array: { start: 3, deleteCount: 0, cells: [{ kind: 2, document: newCellUri }] },
            didOpen: [{ uri: newCellUri, languageId: 'python', version: 1, text: newText }],
          },
        },
      },
    });
    // The training cell is now the sixth cell; its finding stays on its own document and points at the new cell.
    const flagged = await session.waitFor('the training cell flagged again', () => {
      const p = session.pushed.slice(since).filter((x) => x.uri === cellUris[4]).pop();
      return p && p.diagnostics.some((d) => d.code === 'unconstrained-std') ? p : undefined;
    });
    const d = flagged.diagnostics.find((x) => x.code === 'unconstrained-std')!;
    expect(textInRange(texts[4]!, d.range)).toBe('model.noise_std');
    expect(d.relatedInformation![0]!.location.uri).toBe(newCellUri);
    expect(textInRange(newText, d.relatedInformation![0]!.location.range)).toBe('nn.Parameter(torch.ones(()))');
    // Removing the cell again takes the finding away.
    const since2 = session.pushed.length;
    version++;
    void session.connection.sendNotification('notebookDocument/didChange', {
      notebookDocument: { uri: notebookUri, version },
      change: { cells: { structure: { array: { start: 3, deleteCount: 1 }, didClose: [{ uri: newCellUri }] } } },
    });
    await session.waitFor('the training cell clean again', () => session.pushed.slice(since2).find((x) => x.uri === cellUris[4] && x.diagnostics.length === 0));
  });

  it('clears every cell when the notebook closes', async () => {
    const since = session.pushed.length;
    void session.connection.sendNotification('notebookDocument/didClose', {
      notebookDocument: { uri: notebookUri },
      cellTextDocuments: cellUris.filter((_, i) => CELLS[i]!.kind === 2).map((uri) => ({ uri })),
    });
    const cleared = await session.waitFor('cell 4 cleared', () => session.pushed.slice(since).find((x) => x.uri === cellUris[4] && x.diagnostics.length === 0));
    expect(cleared.diagnostics).toEqual([]);
  });
});
