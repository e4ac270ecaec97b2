// A notebook fix changes only the `source` of the cells it edits: outputs, metadata, ids and the file's layout
// (indentation, key order, number spellings, escapes, line breaks, trailing newline) stay byte for byte, and a notebook
// as nbformat writes it (sorted keys, one-space indent, non-ASCII unescaped) is written exactly as nbformat would
// write the fixed notebook. Runs the real `noisewise check --fix`.
import { execFileSync, spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BIN, requireBundle } from '../helpers/cli-run';
import { recordCount } from './fixtures';
import { sourceValueSpans } from './notebook-bytes';

/** The model cell: a trainable scale declared here and used directly as a noise scale (unconstrained-std). */
const MODEL_CELL = [
  'import torch',
  'from torch import nn',
  '',
  '',
  'class PumpBearingNoise(nn.Module):',
  '    def __init__(self):',
  '        super().__init__()',
  '        self.sigma = nn.Parameter(torch.full((4,), 0.1))',
  '',
  '    def forward(self, x):',
  '        return x + self.sigma * torch.randn_like(x)',
  '',
].join('\n');

/** A notebook with everything a fix must not touch: outputs (an image, text, an error), ids, rich metadata. */
function labNotebook(): Record<string, unknown> {
  return {
    nbformat_minor: 5,
    nbformat: 4,
    metadata: {
      kernelspec: { name: 'python3', display_name: 'Python 3 (ipykernel)', language: 'python' },
      language_info: { name: 'python', version: '3.11.7', codemirror_mode: { name: 'ipython', version: 3 } },
      lab: { '10': 'ten', '2': 'two', température: 'élevée', ratio: 1.0, tiny: 1e-5, big: 12345678901234567890 },
    },
    cells: [
      { id: 'b7c2-intro', cell_type: 'markdown', metadata: { tags: ['débit', '水位'] }, source: ['# Pompes — roulements\n', 'Mesures à 0,5 s ⌀ 😀'] },
      { id: 'c01', cell_type: 'code', execution_count: 3, metadata: { scrolled: true, collapsed: false }, outputs: [{ output_type: 'stream', name: 'stdout', text: ['σ = 0.1 → ok\n'] }], source: MODEL_CELL.split(/(?<=\n)/) },
      {
        id: 'c02',
        cell_type: 'code',
        execution_count: 4,
        metadata: {},
        outputs: [
          { output_type: 'display_data', data: { 'image/png': 'iVBORw0KGgoAAAANSUhEUgAAAAEAAAABCAYAAAAfFcSJAAAADUlEQVR42mP8z8BQDwAEhQGAhKmMIQAAAABJRU5ErkJggg==\n', 'text/plain': ['<Figure size 640x480 with 1 Axes>'] }, metadata: { needs_background: 'light' } },
          { output_type: 'error', ename: 'ValueError', evalue: 'bad \u001b[0;31mcolour', traceback: ['\u001b[0;31m---\u001b[0m'] },
        ],
        source: ['model = PumpBearingNoise()\n', 'readings = model(torch.zeros(4))'],
      },
      { id: 'c03', cell_type: 'raw', metadata: { format: 'text/plain' }, source: 'raw\tcell' },
    ],
  };
}

let dir: string;

beforeAll(() => {
  requireBundle();
  dir = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-nb-layout-')));
});
afterAll(() => fs.rmSync(dir, { recursive: true, force: true }));

/** Writes a notebook text, runs `--fix` on it and returns the text after. */
function fix(name: string, raw: string): string {
  const file = path.join(dir, name);
  fs.writeFileSync(file, raw);
  const out = spawnSync(process.execPath, [BIN, 'check', name, '--fix'], { cwd: dir, encoding: 'utf8' });
  expect([0, 1], out.stderr).toContain(out.status);
  const after = fs.readFileSync(file, 'utf8');
  expect(after, `${name}: --fix changed nothing`).not.toBe(raw);
  const again = spawnSync(process.execPath, [BIN, 'check', name, '--format', 'json'], { cwd: dir, encoding: 'utf8' });
  expect((JSON.parse(again.stdout) as { findings: unknown[] }).findings, `${name}: still flagged after --fix`).toEqual([]);
  return after;
}

/** Asserts that only the source values of the `changed` cells differ, byte for byte. */
function expectOnlySourcesChanged(raw: string, after: string, changed: number[]): void {
  const before = sourceValueSpans(raw);
  const now = sourceValueSpans(after);
  expect(now).toHaveLength(before.length);
  let at = 0;
  let atNow = 0;
  for (let i = 0; i < before.length; i++) {
    // The bytes between the previous source value and this one (keys, outputs, metadata, ids, layout) are the same.
    expect(after.slice(atNow, now[i]!.start), `bytes before cell ${i}'s source`).toBe(raw.slice(at, before[i]!.start));
    const same = after.slice(now[i]!.start, now[i]!.end) === raw.slice(before[i]!.start, before[i]!.end);
    expect(same, `cell ${i}'s source ${changed.includes(i) ? 'should change' : 'should not change'}`).toBe(!changed.includes(i));
    at = before[i]!.end;
    atNow = now[i]!.end;
  }
  expect(after.slice(atNow), 'bytes after the last source').toBe(raw.slice(at));
}

/** The notebook as Python's json (as nbformat calls it) writes it: sorted keys, one-space indent, non-ASCII as is. */
function nbformatWrite(json: string): string {
  const script = 'import json, sys\nnb = json.loads(sys.stdin.read())\nsys.stdout.write(json.dumps(nb, sort_keys=True, indent=1, ensure_ascii=False) + "\\n")\n';
  return execFileSync('python3', ['-c', script], { input: json, encoding: 'utf8' });
}

describe('a notebook fix', () => {
  it('writes a notebook as nbformat writes it exactly as nbformat would write the fixed notebook', () => {
    // JavaScript writes 1.0 as 1; Python keeps a float a float.
    const raw = nbformatWrite(JSON.stringify(labNotebook()).replace('"ratio":1,', '"ratio":1.0,'));
    const after = fix('nbformat.ipynb', raw);
    expectOnlySourcesChanged(raw, after, [1]);
    expect(after).toBe(nbformatWrite(after));
    expect(after).toContain('"température": "élevée"');
    expect(after).toContain('"ratio": 1.0');
    expect(after).toContain('"tiny": 1e-05');
    recordCount('notebook layouts byte-compared', 1);
  });

  it('keeps a hand-written layout: key order, two-space indent, escapes, numbers, CRLF and no trailing newline', () => {
    const doc = labNotebook();
    // Key order as written (not sorted), integer-like keys after others, \u escapes as an ASCII-only writer leaves them.
    let raw = JSON.stringify(doc, null, 2).replace('"température": "élevée"', '"temp\\u00e9rature": "\\u00e9lev\\u00e9e"');
    raw = raw.replace('"ratio": 1', '"ratio": 1.0').replace('"tiny": 0.00001', '"tiny": 1e-5').replace(/\n/g, '\r\n');
    const after = fix('hand.ipynb', raw);
    expectOnlySourcesChanged(raw, after, [1]);
    expect(after.endsWith('}')).toBe(true);
    expect(after.replace(/\r\n/g, '')).not.toMatch(/[\r\n]/);
    expect(after).toContain('"temp\\u00e9rature": "\\u00e9lev\\u00e9e"');
    expect(after).toContain('"big": 12345678901234567000');
  });

  it('writes a string source back as a string and a one-line notebook on one line', () => {
    const doc = labNotebook() as { cells: { source: unknown }[] };
    doc.cells[1]!.source = MODEL_CELL;
    const compact = JSON.stringify(doc);
    const after = fix('compact.ipynb', compact);
    expectOnlySourcesChanged(compact, after, [1]);
    expect(after.includes('\n')).toBe(false);
    expect(typeof (JSON.parse(after) as { cells: { source: unknown }[] }).cells[1]!.source).toBe('string');
  });

  it('changes both cells of a fix that edits a declaration and a use in different cells, and nothing else', () => {
    const doc = labNotebook() as { cells: { source: unknown }[] };
    // The layer is declared in cell 1 and its scale used as a noise scale in cell 2 (as in the rule's notebook case).
    doc.cells[1]!.source = ['import torch\n', 'from torch import nn\n', '\n', 'class StageNoise(nn.Module):\n', '    def __init__(self):\n', '        super().__init__()\n', '        self.mu = nn.Parameter(torch.zeros(4))\n', '        self.sigma = nn.Parameter(torch.full((4,), 0.1))\n'];
    doc.cells[2]!.source = ['model = StageNoise()\n', 'draw = model.mu + model.sigma * torch.randn(4)\n'];
    const raw = nbformatWrite(JSON.stringify(doc));
    const file = path.join(dir, 'split.ipynb');
    fs.writeFileSync(file, raw);
    const out = spawnSync(process.execPath, [BIN, 'check', 'split.ipynb', '--fix', '--format', 'json'], { cwd: dir, encoding: 'utf8' });
    const after = fs.readFileSync(file, 'utf8');
    expect([0, 1], out.stderr).toContain(out.status);
    expectOnlySourcesChanged(raw, after, [1, 2]);
    expect(after).toBe(nbformatWrite(after));
  });
});
