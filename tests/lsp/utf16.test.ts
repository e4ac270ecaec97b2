// Column units at the LSP edge: a finding after non-ASCII and non-BMP characters on the same line gets a range in
// UTF-16 code units, so the text under the range is exactly the offending expression, and positions sent back by the
// editor (hover, code actions) resolve to the same finding.
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CodeAction, Diagnostic, Hover, TextDocumentEdit } from 'vscode-languageserver-protocol';
import { applyLspEdits, type LspSession, startSession, tempWorkspace, textInRange, uriOf } from './lsp-client';

// 🌧 is U+1F327 (outside the BMP: two UTF-16 code units, one code point); "Pegelhöhe" has an ü-like BMP letter.
const FLAGGED_LINE = '        w = self.w_mu * len("🌧 Pegelhöhe 🌊") + self.w_sigma * torch.randn_like(self.w_mu)';
const TEXT = [
  'import torch',
  'from torch import nn',
  '',
  '',
  'class GaugeLayer(nn.Module):',
  '    def __init__(self):',
  '        super().__init__()',
  '        self.w_mu = nn.Parameter(torch.zeros(6))',
  '        self.w_sigma = nn.Parameter(torch.full((6,), 0.2))',
  '',
  '    def forward(self, x):',
  FLAGGED_LINE,
  '        return x * w',
  '',
].join('\n');

describe('UTF-16 positions after non-ASCII and non-BMP characters', () => {
  let session: LspSession;
  let uri: string;
  let finding: Diagnostic;

  beforeAll(async () => {
    const root = tempWorkspace({ 'gauge.py': TEXT });
    uri = uriOf(path.join(root, 'gauge.py'));
    session = await startSession({ root });
    session.open(uri, TEXT);
    const published = await session.diagnosticsFor(uri, { version: 1 });
    finding = published.diagnostics.find((d) => d.code === 'unconstrained-std' && d.range.start.line === 11)!;
  });

  afterAll(async () => {
    await session?.stop();
  });

  it('puts the range over the offending expression, counted in UTF-16 code units', () => {
    expect(finding).toBeDefined();
    expect(textInRange(TEXT, finding.range)).toBe('self.w_sigma');
    const utf16 = FLAGGED_LINE.indexOf('self.w_sigma');
    const codePoints = [...FLAGGED_LINE.slice(0, utf16)].length;
    // The two emoji make the units differ by two, so a code-point column would miss the expression.
    expect(utf16 - codePoints).toBe(2);
    expect(finding.range.start).toEqual({ line: 11, character: utf16 });
    expect(finding.range.end).toEqual({ line: 11, character: utf16 + 'self.w_sigma'.length });
  });

  it('resolves a hover at the last character of the expression to the finding', async () => {
    const hover = (await session.connection.sendRequest('textDocument/hover', {
      textDocument: { uri },
      position: { line: 11, character: finding.range.end.character - 1 },
    })) as Hover;
    expect(hover).not.toBeNull();
    expect(hover.range).toEqual(finding.range);
  });

  it('rewrites exactly the expression with the preferred quick fix', async () => {
    const actions = (await session.connection.sendRequest('textDocument/codeAction', {
      textDocument: { uri },
      range: finding.range,
      context: { diagnostics: [finding] },
    })) as CodeAction[];
    const edits = (actions.find((a) => a.isPreferred)!.edit!.documentChanges as TextDocumentEdit[])[0]!.edits;
    const fixed = applyLspEdits(TEXT, edits).split('\n');
    expect(fixed[11]).toBe('        w = self.w_mu * len("🌧 Pegelhöhe 🌊") + self.log_w_sigma.exp() * torch.randn_like(self.w_mu)');
  });

  it('keeps ranges right after an incremental edit inserted before the expression on the same line', async () => {
    const before = finding.range.start.character;
    const insertAt = FLAGGED_LINE.indexOf('🌊');
    session.change(uri, 2, [{ range: { start: { line: 11, character: insertAt }, end: { line: 11, character: insertAt } }, text: '💧' }]);
    const published = await session.diagnosticsFor(uri, { version: 2 });
    const moved = published.diagnostics.find((d) => d.code === 'unconstrained-std' && d.range.start.line === 11)!;
    expect(moved.range.start.character).toBe(before + 2);
    const newText = TEXT.replace('🌊', '💧🌊');
    expect(textInRange(newText, moved.range)).toBe('self.w_sigma');
  });
});
