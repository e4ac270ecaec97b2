// Per-file summaries (engine/summaries.ts, Workspace.fileSummary): a rule's workspace-wide question answered from
// them follows edits of another file (the summary of the edited file and of its importers is dropped), and gives the
// same findings when the analysis cache is far smaller than the workspace.
import { describe, expect, it } from 'vitest';
import { checkFile, summaryKinds } from '../server/src/engine/check';
import { prepareSummaries } from '../server/src/engine/summaries';
import { buildWorkspace, type TestWorkspace } from './helpers/workspace';

const LAYERS = [
  'import torch',
  'from torch import nn',
  '',
  '',
  'class RainDropout(nn.Module):',
  '    def __init__(self, n):',
  '        super().__init__()',
  '        self.log_alpha = nn.Parameter(torch.full((n,), -3.0))',
  '',
  '    def forward(self, x):',
  '        return x * (1 + torch.exp(0.5 * self.log_alpha) * torch.randn_like(x))',
  '',
].join('\n');

const TRAIN = ['from lab.layers import RainDropout', '', 'layer = RainDropout(4)', ''].join('\n');
const CLAMPED = `${TRAIN}layer.log_alpha.data.clamp_(max=0.0)\n`;

function noiseRateFindings(ws: TestWorkspace, relative: string): number {
  const report = checkFile(ws.workspace, ws.abs(relative), { severity: {}, datasetSizeNames: [] });
  return report.findings.filter((f) => f.rule === 'unbounded-noise-rate').length;
}

describe('per-file summaries', () => {
  it('follow an edit of another file: a clamp added after the optimiser step bounds the rate, removing it does not', async () => {
    const ws = await buildWorkspace({ 'lab/layers.py': LAYERS, 'lab/train.py': TRAIN, 'lab/report.py': 'x = 1\n' });
    expect(noiseRateFindings(ws, 'lab/layers.py')).toBe(1);
    ws.set('lab/train.py', CLAMPED);
    expect(noiseRateFindings(ws, 'lab/layers.py')).toBe(0);
    ws.set('lab/train.py', TRAIN);
    expect(noiseRateFindings(ws, 'lab/layers.py')).toBe(1);
  });

  it('are kept across cache trims: with room for one analysis the findings are those of an unbounded cache', async () => {
    const files: Record<string, string> = { 'lab/layers.py': LAYERS, 'lab/train.py': CLAMPED };
    for (let i = 0; i < 12; i++) files[`lab/extra_${i}.py`] = `value_${i} = ${i}\n`;
    const small = await buildWorkspace(files, { cacheLimit: 1 });
    const large = await buildWorkspace(files);
    const paths = Object.keys(files).sort().map((rel) => small.abs(rel));
    prepareSummaries(small.workspace, paths, summaryKinds(), 30_000);
    expect(noiseRateFindings(small, 'lab/layers.py')).toBe(0);
    expect(noiseRateFindings(large, 'lab/layers.py')).toBe(0);
    // Every file's summary is still held after the cache is trimmed back to one analysis.
    small.workspace.trimCache();
    expect(small.workspace.exportSummaries(paths).length).toBe(paths.length);
  });
});
