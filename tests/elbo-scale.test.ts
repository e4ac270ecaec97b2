// Checks every factor and figure of elbo-scale-mismatch against the published values: the loss forms of SOURCES.md §1.2,
// Pyro's plate scale of §1.5, the worked numbers of §9, the TFP example of §1.6 and the message example of RULES.md.
import { describe, expect, it } from 'vitest';
import { describeDims, type Dims, evaluateDims, ONE, over, pyroPlateScale, readLiteralAs, type Reduction, relativeKlWeight, type Scale, symbol, times } from '../rules/elbo-scale-mismatch/scale';
import { judge } from '../rules/elbo-scale-mismatch/torch-loss';
import type { Finding } from '../server/src/engine/finding';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { checkSources } from '../server/src/engine/check';
import { checkTexts } from './helpers/engine';

const N = symbol({ symbol: 'N', text: 'N', value: null, strong: true });
const B = symbol({ symbol: 'B', text: 'B', value: null, strong: true });
const K = over(N, B);
const P = symbol({ symbol: 'P', text: 'P', value: null, strong: true });

/** The relative KL weight of `dataFactor·D + klFactor·KL`, as exponents. */
function weight(dataFactor: Scale, reduction: Reduction, klFactor: Scale): Dims {
  return relativeKlWeight({ data: dataFactor, reduction, kl: klFactor }).dims;
}

describe('SOURCES.md §1.2: the KL weight of each loss form relative to the ELBO', () => {
  // Each expectation is the "KL weight vs correct" column of the §1.2 table ([X], algebra on §1.1, Kingma et al. 2015, Sec. 2.1).
  it('(a) (N/B)·ΣCE + KL is correct', () => expect(describeDims(weight(K, 'sum', ONE))).toBeNull());
  it('(b) ΣCE + KL/K is correct', () => expect(describeDims(weight(ONE, 'sum', over(ONE, K)))).toBeNull());
  it('(c) mean(CE) + KL/N is correct', () => expect(describeDims(weight(ONE, 'mean', over(ONE, N)))).toBeNull());
  it('mean(CE) + KL is N× too heavy', () => expect(describeDims(weight(ONE, 'mean', ONE))).toEqual({ factor: 'N×', direction: 'heavy' }));
  it('ΣCE + KL is K× too heavy', () => expect(describeDims(weight(ONE, 'sum', ONE))).toEqual({ factor: 'K×', direction: 'heavy' }));
  it('mean(CE) + KL/B is K× too heavy', () => expect(describeDims(weight(ONE, 'mean', over(ONE, B)))).toEqual({ factor: 'K×', direction: 'heavy' }));
  it('mean(CE) + KL/K is B× too heavy', () => expect(describeDims(weight(ONE, 'mean', over(ONE, K)))).toEqual({ factor: 'B×', direction: 'heavy' }));
  it('ΣCE + KL/N is B× too light', () => expect(describeDims(weight(ONE, 'sum', over(ONE, N)))).toEqual({ factor: 'B×', direction: 'light' }));
  it('a KL averaged over the weights is lighter by the number of weights', () => expect(describeDims(weight(ONE, 'mean', over(over(ONE, N), P)))).toEqual({ factor: 'P×', direction: 'light' }));
  it('any constant factor on the whole loss leaves the weighting correct (§1.2: "up to a constant factor")', () => {
    const two = times(ONE, { ...ONE, coef: 2 });
    expect(describeDims(weight(two, 'mean', times(two, over(ONE, N))))).toBeNull();
  });
});

describe('SOURCES.md §1.2 with N = 60000 and B = 128 (the numbers of §9)', () => {
  // N = 60000, B = 128 are the §9 Pyro example's numbers; K = N/B = 468.75 is the value §9 gives for N/B.
  const values = { n: 60_000, b: 128 };
  it('N× is 60000', () => expect(evaluateDims(weight(ONE, 'mean', ONE), values)).toBe(60_000));
  it('K× is N/B = 468.75 (SOURCES.md §9)', () => expect(evaluateDims(weight(ONE, 'sum', ONE), values)).toBe(468.75));
  it('B× is 128', () => expect(evaluateDims(weight(ONE, 'mean', over(ONE, K)), values)).toBe(128));
  it('B× too light is 1/128', () => expect(evaluateDims(weight(ONE, 'sum', over(ONE, N)), values)).toBe(1 / 128));
});

describe('SOURCES.md §1.5: Pyro plate scale', () => {
  it('scale = size/subsample_size; N = 60000, B = 128 gives 468.75 (SOURCES.md §9)', () => expect(pyroPlateScale(60_000, 128)).toBe(468.75));
});

describe('judge: which relative weights fire', () => {
  const relative = (data: Scale, reduction: Reduction, kl: Scale) => relativeKlWeight({ data, reduction, kl });
  it('fires on mean(CE) + KL with the number N (SOURCES.md §1.2: N× too heavy)', () => {
    expect(judge({ relative: relative(ONE, 'mean', ONE), regime: 'minibatch', n: 60_000, b: 128 })).toEqual({ fire: true, dims: { n: 1, b: 0, p: 0 }, numeric: 60_000 });
  });
  it('stays quiet on ΣCE + KL when the step may see the whole training set (B = N makes it form (b) with K = 1)', () => {
    expect(judge({ relative: relative(ONE, 'sum', ONE), regime: 'unknown', n: null, b: null }).fire).toBe(false);
    expect(judge({ relative: relative(ONE, 'sum', ONE), regime: 'full', n: null, b: null }).fire).toBe(false);
    expect(judge({ relative: relative(ONE, 'sum', ONE), regime: 'minibatch', n: null, b: null }).fire).toBe(true);
  });
  it('stays quiet when a literal equal to 1/N compensates (kl / 60000 with N = 60000)', () => {
    const kl = { ...ONE, coef: 1 / 60_000 };
    expect(judge({ relative: relative(ONE, 'mean', kl), regime: 'minibatch', n: 60_000, b: 128 }).fire).toBe(false);
  });
  it('stays quiet on a large literal when N is unknown (it may be N written out)', () => {
    expect(judge({ relative: relative(ONE, 'mean', { ...ONE, coef: 1 / 60_000 }), regime: 'minibatch', n: null, b: null }).fire).toBe(false);
  });
  it('stays quiet on a documented constant weight (a deliberate tempering)', () => {
    expect(judge({ relative: relative(ONE, 'mean', { ...ONE, coef: 0.02, documented: true }), regime: 'minibatch', n: 60_000, b: 128 }).fire).toBe(false);
  });
  it('stays quiet on an unknown factor', () => {
    expect(judge({ relative: relative(ONE, 'mean', { ...ONE, opaque: true }), regime: 'minibatch', n: 60_000, b: 128 }).fire).toBe(false);
  });
  it('reads a hard-coded batch size as B (kl / 128 with batches of 128 is mean(CE) + KL/B: K× = 468.75, SOURCES.md §9)', () => {
    const kl = readLiteralAs({ ...ONE, coef: 1 / 128 }, { n: 60_000, b: 128 });
    expect(judge({ relative: relative(ONE, 'mean', kl), regime: 'minibatch', n: 60_000, b: 128 }).numeric).toBe(468.75);
  });
});

const PRELUDE = `import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal, kl_divergence
from torch.utils.data import DataLoader, TensorDataset


class Layer(nn.Module):
    def __init__(self):
        super().__init__()
        self.mu = nn.Parameter(torch.zeros(10, 784))
        self.rho = nn.Parameter(torch.full((10, 784), -5.0))

    def forward(self, x):
        return x @ (self.mu + F.softplus(self.rho) * torch.randn_like(self.mu)).t()

    def kl(self):
        return kl_divergence(Normal(self.mu, F.softplus(self.rho)), Normal(0.0, 1.0)).sum()


images = torch.randn(60_000, 784)
labels = torch.randint(0, 10, (60_000,))
loader = DataLoader(TensorDataset(images, labels), batch_size=128, shuffle=True)
model = Layer()
opt = torch.optim.Adam(model.parameters())
for x, y in loader:
`;

async function findingsFor(loss: string, prelude = PRELUDE): Promise<Finding[]> {
  const text = `${prelude}    loss = ${loss}\n    opt.zero_grad()\n    loss.backward()\n    opt.step()\n`;
  const reports = await checkTexts({ 'train.py': text }, ['elbo-scale-mismatch']);
  return reports[0]!.findings;
}

function figure(f: Finding, label: string): number | string | undefined {
  return f.figures.find((g) => g.label === label)?.value;
}

describe('end to end: N = 60000 training images, B = 128 per batch', () => {
  it('mean(CE) + KL: KL weighted 60,000× too strongly; figures N, B, K = 468.75 (SOURCES.md §9) and 60000×', async () => {
    const [f, ...rest] = await findingsFor('F.cross_entropy(model(x), y) + model.kl()');
    expect(rest).toEqual([]);
    expect(f!.message).toContain('KL weighted 60,000× too strongly');
    expect(figure(f!, 'N (training examples)')).toBe(60_000);
    expect(figure(f!, 'B (examples per step)')).toBe(128);
    expect(figure(f!, 'K = N/B (batches per epoch)')).toBe(468.75);
    expect(figure(f!, 'KL weight relative to the ELBO (×)')).toBe(60_000);
  });
  it('mean(CE) + KL/B: K× = 468.75 too strong (SOURCES.md §1.2 row "mean(CE) + KL/B", §9 N/B)', async () => {
    const [f] = await findingsFor('F.cross_entropy(model(x), y) + model.kl() / x.shape[0]');
    expect(figure(f!, 'KL weight relative to the ELBO (×)')).toBe(468.75);
    expect(f!.message).toContain('KL weighted 468.75× too strongly');
    expect(f!.message).toContain('N = 60,000, B = 128, K = N/B = 468.75 batches per epoch');
  });
  it('mean(CE) + KL/K: B× = 128 too strong (SOURCES.md §1.2 row "mean(CE) + KL/K")', async () => {
    const [f] = await findingsFor('F.cross_entropy(model(x), y) + model.kl() / len(loader)');
    expect(figure(f!, 'KL weight relative to the ELBO (×)')).toBe(128);
    expect(f!.message).toContain('KL weighted 128× too strongly');
  });
  it('ΣCE + KL: K× = 468.75 too strong (SOURCES.md §1.2 row "ΣCE + KL")', async () => {
    const [f] = await findingsFor('F.cross_entropy(model(x), y, reduction="sum") + model.kl()');
    expect(figure(f!, 'KL weight relative to the ELBO (×)')).toBe(468.75);
  });
  it('ΣCE + KL/N: B× too light, 1/128 (SOURCES.md §1.2 row "ΣCE + KL/N")', async () => {
    const [f] = await findingsFor('F.cross_entropy(model(x), y, reduction="sum") + model.kl() / len(loader.dataset)');
    expect(figure(f!, 'KL weight relative to the ELBO (×)')).toBe(1 / 128);
    expect(f!.message).toContain('KL weighted 128× too weakly');
    expect(f!.message).toContain('the KL gets 1/128 of its ELBO weight');
  });
  it('the three correct forms (a), (b), (c) of SOURCES.md §1.2 stay quiet', async () => {
    expect(await findingsFor('len(loader.dataset) / x.shape[0] * F.cross_entropy(model(x), y, reduction="sum") + model.kl()')).toEqual([]);
    expect(await findingsFor('F.cross_entropy(model(x), y, reduction="sum") + model.kl() / len(loader)')).toEqual([]);
    expect(await findingsFor('F.cross_entropy(model(x), y) + model.kl() / len(loader.dataset)')).toEqual([]);
  });
  it('the RULES.md message example: N = 48000 gives "KL weighted 48,000× too strongly"', async () => {
    const [f] = await findingsFor('F.cross_entropy(model(x), y) + model.kl()', PRELUDE.replace(/60_000/g, '48_000'));
    expect(f!.message).toContain('KL weighted 48,000× too strongly');
    expect(figure(f!, 'KL weight relative to the ELBO (×)')).toBe(48_000);
  });
});

describe('end to end: Pyro and TFP', () => {
  it('a plate sized by the minibatch with N = 60000, B = 128: Pyro should scale by 468.75 (SOURCES.md §1.5, §9)', async () => {
    const text = `import pyro
import pyro.distributions as dist
import torch
from pyro.infer import SVI, Trace_ELBO
from pyro.infer.autoguide import AutoNormal
from torch.utils.data import DataLoader, TensorDataset

x_all = torch.randn(60_000)
y_all = torch.randn(60_000)
loader = DataLoader(TensorDataset(x_all, y_all), batch_size=128)


def model(x, y=None):
    w = pyro.sample("w", dist.Normal(0.0, 1.0))
    with pyro.plate("data", len(x)):
        pyro.sample("obs", dist.Normal(w * x, 1.0), obs=y)


svi = SVI(model, AutoNormal(model), pyro.optim.Adam({"lr": 0.01}), loss=Trace_ELBO())
for xb, yb in loader:
    svi.step(xb, yb)
`;
    const [f] = (await checkTexts({ 'fit.py': text }, ['elbo-scale-mismatch']))[0]!.findings;
    expect(figure(f!, 'likelihood scale with subsample_size (N/B)')).toBe(468.75);
    expect(figure(f!, 'likelihood scale applied now')).toBe(1);
    expect(f!.message).toContain('Pyro should scale the likelihood by N/B = 468.75');
  });
  it('TFP: the shipped example divides the KL by NUM_TRAIN_EXAMPLES = 60000 (SOURCES.md §1.6, form (c)); without it the KL is 60000× too strong', async () => {
    const make = (fn: string) => `import numpy as np
import tensorflow as tf
import tensorflow_probability as tfp

NUM_TRAIN_EXAMPLES = 60000
x_train = np.zeros((60000, 784), dtype="float32")
y_train = np.zeros(60000, dtype="int32")
model = tf.keras.Sequential([tfp.layers.DenseFlipout(10${fn})])
model.compile(optimizer="adam", loss="sparse_categorical_crossentropy")
model.fit(x_train, y_train, batch_size=128)
`;
    const scaled = await checkTexts({ 'leaf.py': make(', kernel_divergence_fn=lambda q, p, _: tfp.distributions.kl_divergence(q, p) / NUM_TRAIN_EXAMPLES') }, ['elbo-scale-mismatch']);
    expect(scaled[0]!.findings).toEqual([]);
    const [f] = (await checkTexts({ 'leaf.py': make('') }, ['elbo-scale-mismatch']))[0]!.findings;
    expect(figure(f!, 'KL weight relative to the ELBO (×)')).toBe(60_000);
    expect(f!.message).toContain('the KL is weighted 60,000× too strongly');
    expect(f!.fixes[0]!.edits[0]!.newText).toBe(', kernel_divergence_fn=lambda q, p, _: tfp.distributions.kl_divergence(q, p) / NUM_TRAIN_EXAMPLES');
  });
});

describe('elbo-scale-mismatch with a configuration per folder', () => {
  // a/ names `n_gauges` a dataset size in its configuration; shared/ (where the loss is written) does not. The
  // combination `mean(NLL) + KL * n_gauges` lies in shared/layers.py and is judged with shared/'s settings, so it is
  // quiet there, whichever file was checked first. Until the rule kept its memo tables per set of names, the scales
  // worked out while checking a/train.py (first in order) were reused for shared/layers.py.
  const layer = fs.readFileSync(path.join(__dirname, '..', 'rules', 'elbo-scale-mismatch', 'cases', 'flagged-mean-forms.py'), 'utf8').split('\n').slice(1, 27).join('\n');
  const files: Record<string, string> = {
    'a/train.py': trainScript(),
    'b/train.py': trainScript(),
    'shared/layers.py': `${layer}\n\n\ndef objective(model, xb, yb, n_gauges):\n    return F.mse_loss(model(xb), yb) + model.kl() * n_gauges\n`,
  };
  const run = async (namesFor: (p: string) => string[]) => {
    const root = path.resolve('/virtual-workspace');
    const reports = await checkSources(
      Object.entries(files).map(([p, text]) => ({ path: p, absPath: path.join(root, p), text })),
      { workspaceRoot: root, settingsFor: (absPath) => ({ severity: {}, datasetSizeNames: namesFor(path.relative(root, absPath)) }), rules: { only: ['elbo-scale-mismatch'] } },
    );
    return Object.fromEntries(reports.map((r) => [r.path, r.findings.length]));
  };
  it('judges a shared loss with the settings of its own folder', async () => {
    expect(await run((p) => (p.startsWith('a/') ? ['n_gauges'] : []))).toEqual({ 'a/train.py': 0, 'b/train.py': 0, 'shared/layers.py': 0 });
  });
  it('and flags it when its own folder names the dataset size', async () => {
    expect(await run((p) => (p.startsWith('shared/') ? ['n_gauges'] : []))).toEqual({ 'a/train.py': 0, 'b/train.py': 0, 'shared/layers.py': 1 });
  });
});

function trainScript(): string {
  return `import sys

import torch
from torch.utils.data import DataLoader, TensorDataset

from shared.layers import StageBayesLinear, objective

rain = torch.randn(480, 24)
stage = torch.randn(480, 1)
gauge_loader = DataLoader(TensorDataset(rain, stage), batch_size=32, shuffle=True)
n_gauges = int(sys.argv[1])
model = StageBayesLinear(24, 1)
optimizer = torch.optim.Adam(model.parameters(), lr=1e-2)

for xb, yb in gauge_loader:
    loss = objective(model, xb, yb, n_gauges)
    optimizer.zero_grad()
    loss.backward()
    optimizer.step()
`;
}
