// Unit tests of noiseless-mc-evaluation: model-mode tracking through helpers, callers and classes, the model's
// randomness resolved from its layers, the loops that count as Monte Carlo sampling, figures, and JAX keys.
import { describe, expect, it } from 'vitest';
import { checkTexts } from './helpers/engine';

const RULE = 'noiseless-mc-evaluation';

const MODELS = `import torch
import torch.nn.functional as F
from torch import nn


class PumpNet(nn.Module):
    def __init__(self, p=0.3):
        super().__init__()
        self.body = nn.Sequential(nn.Linear(32, 64), nn.BatchNorm1d(64), nn.ReLU(), nn.Dropout(p))
        self.head = nn.Linear(64, 5)

    def forward(self, x):
        return self.head(self.body(x))
`;

/** Checks a workspace and returns `path:line messageId` for every finding of the rule. */
async function run(files: Record<string, string>): Promise<string[]> {
  const reports = await checkTexts(files, [RULE]);
  const out: string[] = [];
  for (const r of reports) {
    for (const f of r.findings) {
      if (f.rule !== RULE) continue;
      const line = r.text.slice(0, f.start).split('\n').length;
      out.push(`${r.path}:${line} ${f.messageId}`);
    }
    expect(r.notes.filter((n) => n.kind === 'internal')).toEqual([]);
  }
  return out.sort();
}

/** A one-file workspace: the models above, then the given code. */
function single(code: string): Record<string, string> {
  return { 'eval_pumps.py': `${MODELS}\n\n${code}` };
}

/** The line number in `single(code)` of the first line of `code` that contains `marker`. */
function lineOf(code: string, marker: string): number {
  const offset = `${MODELS}\n\n`.split('\n').length - 1;
  return offset + code.split('\n').findIndex((l) => l.includes(marker)) + 1;
}

describe('model mode along the control flow', () => {
  it('fires after .eval(), .train(False) and .train(mode=False), and not after .train() or .train(True)', async () => {
    for (const [setter, fires] of [
      ['model.eval()', true],
      ['model.train(False)', true],
      ['model.train(mode=False)', true],
      ['model.eval()\n    model.train()', false],
      ['model.eval()\n    model.train(True)', false],
      ['pass', false],
    ] as const) {
      const code = `def mc(x):\n    model = PumpNet()\n    ${setter}\n    return torch.stack([model(x) for _ in range(20)]).std(0)  # loop\n`;
      expect(await run(single(code)), setter).toEqual(fires ? [`eval_pumps.py:${lineOf(code, '# loop')} eval-mode`] : []);
    }
  });

  it('needs eval mode on every path: both branches fire, one branch does not', async () => {
    const both = `def mc(x, fast):\n    model = PumpNet()\n    if fast:\n        model.eval()\n    else:\n        model.train(False)\n    return torch.stack([model(x) for _ in range(20)])  # loop\n`;
    expect(await run(single(both))).toEqual([`eval_pumps.py:${lineOf(both, '# loop')} eval-mode`]);
    const one = `def mc(x, fast):\n    model = PumpNet()\n    if fast:\n        model.eval()\n    return torch.stack([model(x) for _ in range(20)])\n`;
    expect(await run(single(one))).toEqual([]);
  });

  it('tracks each model object separately, through aliases and self-returning calls', async () => {
    const code = [
      'def mc(x):',
      '    tuned = PumpNet()',
      '    fresh = PumpNet()',
      '    tuned.eval()',
      '    alias = tuned',
      '    a = torch.stack([fresh(x) for _ in range(10)])',
      '    b = torch.stack([alias(x) for _ in range(10)])  # alias loop',
      '    moved = PumpNet().to("cpu").eval()',
      '    c = torch.stack([moved(x) for _ in range(10)])  # moved loop',
      '    return a, b, c',
      '',
    ].join('\n');
    expect(await run(single(code))).toEqual([`eval_pumps.py:${lineOf(code, '# alias loop')} eval-mode`, `eval_pumps.py:${lineOf(code, '# moved loop')} eval-mode`]);
  });

  it('follows helpers two levels deep across files, and the effect of a helper on its argument', async () => {
    const files = {
      'models.py': MODELS,
      'prepare.py': 'def freeze(model):\n    model.eval()\n    return model\n',
      'loading.py': 'import torch\n\nfrom models import PumpNet\nfrom prepare import freeze\n\n\ndef load_model(path):\n    model = PumpNet()\n    model.load_state_dict(torch.load(path))\n    return freeze(model)\n',
      'evaluate.py': [
        'import torch',
        '',
        'from loading import load_model',
        'from models import PumpNet',
        'from prepare import freeze',
        '',
        '',
        'def from_loader(x):',
        '    model = load_model("pump.pt")',
        '    return torch.stack([model(x) for _ in range(30)])',
        '',
        '',
        'def from_side_effect(x):',
        '    model = PumpNet()',
        '    freeze(model)',
        '    return torch.stack([model(x) for _ in range(30)])',
        '',
      ].join('\n'),
    };
    expect(await run(files)).toEqual(['evaluate.py:10 eval-mode', 'evaluate.py:16 eval-mode']);
  });

  it('resolves a parameter through every caller, two levels up; callers that disagree keep it quiet', async () => {
    const loop = 'def mc_loop(model, x, n):\n    outs = []\n    for _ in range(n):\n        outs.append(model(x))\n    return torch.stack(outs)\n\n\ndef evaluate(model, x):\n    return mc_loop(model, x, 25)\n';
    const agree = `${loop}\n\ndef main(x):\n    model = PumpNet()\n    model.eval()\n    return evaluate(model, x)\n`;
    expect(await run(single(agree))).toEqual([`eval_pumps.py:${lineOf(agree, 'outs.append')} eval-mode`]);
    const disagree = `${agree}\n\ndef train_time(x):\n    return evaluate(PumpNet(), x)\n`;
    expect(await run(single(disagree))).toEqual([]);
    // With no caller at all the mode is unknown.
    expect(await run(single(loop))).toEqual([]);
  });

  it('follows a model kept by a class: eval in __init__, or passed in already in eval mode', async () => {
    const code = [
      'class Predictor:',
      '    def __init__(self, model, n_samples=40):',
      '        self.model = model',
      '        self.model.eval()',
      '        self.n_samples = n_samples',
      '',
      '    def predict(self, x):',
      '        return torch.stack([self.model(x) for _ in range(self.n_samples)])  # predictor loop',
      '',
      '',
      'class Holder:',
      '    def __init__(self, model):',
      '        self.model = model',
      '',
      '    def predict(self, x):',
      '        return torch.stack([self.model(x) for _ in range(8)])  # holder loop',
      '',
      '',
      'def main(x):',
      '    return Predictor(PumpNet()).predict(x), Holder(PumpNet().eval()).predict(x)',
      '',
    ].join('\n');
    expect(await run(single(code))).toEqual([`eval_pumps.py:${lineOf(code, '# predictor loop')} eval-mode`, `eval_pumps.py:${lineOf(code, '# holder loop')} eval-mode`]);
    const retrained = code.replace("    def predict(self, x):\n        return torch.stack([self.model(x) for _ in range(self.n_samples)])", '    def fit(self):\n        self.model.train()\n\n    def predict(self, x):\n        return torch.stack([self.model(x) for _ in range(self.n_samples)])');
    expect(await run(single(retrained))).toEqual([`eval_pumps.py:${lineOf(retrained, '# holder loop')} eval-mode`]);
  });

  it('stays quiet when dropout is switched back on in any of the usual ways', async () => {
    for (const enable of [
      'for m in model.modules():\n        if isinstance(m, nn.Dropout):\n            m.train()',
      'for name, m in model.named_modules():\n        if "drop" in name:\n            m.training = True',
      'model.apply(lambda m: m.train() if type(m) == nn.Dropout else None)',
      'model.body[3].train()',
      'enable(model)',
    ]) {
      const code = `def enable(net):\n    for m in net.modules():\n        if m.__class__.__name__.startswith("Dropout"):\n            m.train()\n\n\ndef mc(x):\n    model = PumpNet()\n    model.eval()\n    ${enable}\n    return torch.stack([model(x) for _ in range(20)])\n`;
      expect(await run(single(code)), enable).toEqual([]);
    }
  });
});

describe('the randomness of the model', () => {
  const layered = (layers: string, forward = 'return self.net(x)') =>
    `import torch\nimport torch.nn.functional as F\nfrom torch import nn\n\n\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = ${layers}\n\n    def forward(self, x):\n        ${forward}\n\n\ndef mc(x):\n    model = Net()\n    model.eval()\n    return torch.stack([model(x) for _ in range(20)])\n`;

  it.each([
    ['nn.Sequential(nn.Linear(4, 4), nn.AlphaDropout(0.2))', true],
    ['nn.Sequential(nn.Linear(4, 4), nn.Dropout2d())', true],
    ['nn.LSTM(4, 8, num_layers=2, dropout=0.2)', true],
    ['nn.TransformerEncoderLayer(d_model=8, nhead=2)', true],
    ['nn.ModuleList([nn.Sequential(nn.Linear(4, 4), nn.Dropout(0.1)) for _ in range(3)])', true],
    ['nn.LSTM(4, 8, num_layers=2)', false],
    ['nn.Sequential(nn.Linear(4, 4), nn.Dropout(p=0.0))', false],
    ['nn.Sequential(nn.Linear(4, 4), nn.BatchNorm1d(4))', false],
    ['torchbnn.BayesLinear(prior_mu=0, prior_sigma=0.1, in_features=4, out_features=4)', false],
  ])('%s → fires: %s', async (layers, fires) => {
    const text = (layers.startsWith('torchbnn') ? 'import torchbnn\n' : '') + layered(layers);
    expect((await run({ 'net.py': text })).length).toBe(fires ? 1 : 0);
  });

  it.each([
    ['F.dropout(self.fc(x), 0.2, training=self.training)', true],
    ['F.dropout(self.fc(x), 0.2)', false],
    ['F.dropout(self.fc(x), 0.2, training=True)', false],
    ['self.fc(x) * (1 + 0.1 * torch.randn_like(x)) if self.training else self.fc(x)', true],
    ['self.fc(x) + 0.1 * torch.randn_like(x)', false],
    ['nn.Dropout(0.2)(self.fc(x))', false],
  ])('forward returning %s → fires: %s', async (expr, fires) => {
    const text = layered('None', `return ${expr}`).replace('self.net = None', 'self.fc = nn.Linear(4, 4)');
    expect((await run({ 'net.py': text })).length).toBe(fires ? 1 : 0);
  });

  it('sees noise after an early `if not self.training: return x` as mode-dependent, and weight sampling as not', async () => {
    const guarded = layered('nn.Linear(4, 4)', 'if not self.training:\n            return self.net(x)\n        return self.net(x * torch.bernoulli(torch.full_like(x, 0.9)))');
    expect((await run({ 'net.py': guarded })).length).toBe(1);
    const sampling = guarded.replace('class Net(nn.Module):', 'class Bayes(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.mu = nn.Parameter(torch.zeros(4, 4))\n\n    def forward(self, x):\n        return x @ (self.mu + 0.1 * torch.randn_like(self.mu))\n\n\nclass Net(nn.Module):').replace("self.net = nn.Linear(4, 4)", 'self.net = nn.Linear(4, 4)\n        self.bayes = Bayes()');
    expect(await run({ 'net.py': sampling })).toEqual([]);
  });
});

describe('loops that count as Monte Carlo sampling', () => {
  const loops: [string, boolean][] = [
    ['outs = []\n    for _ in range(10):\n        outs.append(model(x))\n    return outs', true],
    ['total = 0\n    for _ in range(10):\n        total += model(x)\n    return total', true],
    ['outs = torch.zeros(10, 5)\n    for t in range(10):\n        outs[t] = model(x).mean(0)\n    return outs', true],
    ['outs = []\n    for _ in range(10):\n        y = model(x)\n        p = y.softmax(-1)\n        outs.append(p)\n    return outs', true],
    ['return sum(model(x) for _ in range(10)) / 10', true],
    ['for _ in range(10):\n        model(x)\n    return None', false],
    ['return [model(x) for _ in range(1)]', false],
    ['return [model(x[i]) for i in range(10)]', false],
    ['return [model(x + 0.1 * torch.randn_like(x)) for _ in range(10)]', false],
    ['members = [PumpNet().eval() for _ in range(3)]\n    return [m(x) for m in members]', false],
  ];
  it.each(loops)('%s → fires: %s', async (body, fires) => {
    const code = `def mc(x):\n    model = PumpNet()\n    model.eval()\n    ${body}\n`;
    expect((await run(single(code))).length).toBe(fires ? 1 : 0);
  });
});

describe('figures', () => {
  it('states the number of identical samples, folded through the callers, and a spread of zero', async () => {
    const code = 'MC_SAMPLES = 50\n\n\ndef mc(model, x, n):\n    return torch.stack([model(x) for _ in range(n)]).std(0)\n\n\ndef main(x):\n    model = PumpNet()\n    model.eval()\n    return mc(model, x, MC_SAMPLES)\n';
    const reports = await checkTexts(single(code), [RULE]);
    const [f] = reports[0]!.findings;
    expect(f?.figures).toEqual([
      { label: 'identical samples', value: 50 },
      { label: 'distinct predictions among the samples', value: 1 },
      { label: 'spread across the samples (std, variance)', value: 0 },
    ]);
    expect(f?.message).toContain('all 50 passes of this loop are identical');
  });
});

describe('the fix', () => {
  it('switches a workspace layer with normalisation inside by its own flag, without recursing', async () => {
    const code = [
      'class NoisyNorm(nn.Module):',
      '    def __init__(self):',
      '        super().__init__()',
      '        self.norm = nn.BatchNorm1d(4)',
      '',
      '    def forward(self, x):',
      '        return F.dropout(self.norm(x), 0.2, training=self.training)',
      '',
      '',
      'def mc(x):',
      '    model = NoisyNorm()',
      '    model.eval()',
      '    return torch.stack([model(x) for _ in range(20)])',
      '',
    ].join('\n');
    const reports = await checkTexts(single(code), [RULE]);
    const fix = reports[0]!.findings[0]!.fixes[0]!;
    expect(fix.safety).toBe('review');
    expect(fix.edits.map((e) => e.newText)).toEqual(['    for module in model.modules():\n        if isinstance(module, NoisyNorm):\n            module.training = True\n']);
  });
});

describe('JAX', () => {
  const flax = `import jax
import jax.numpy as jnp
import flax.linen as nn


class LeafMLP(nn.Module):
    @nn.compact
    def __call__(self, x, deterministic=False):
        return nn.Dense(4)(nn.Dropout(0.2, deterministic=deterministic)(nn.relu(nn.Dense(16)(x))))
`;
  it('fires on one key reused by every pass and not on split or folded keys', async () => {
    const reuse = `${flax}\n\ndef mc(params, x, key):\n    model = LeafMLP()\n    return jnp.stack([model.apply(params, x, rngs={"dropout": key}) for _ in range(20)])\n`;
    expect(await run({ 'leaf.py': reuse })).toEqual([`leaf.py:${reuse.split('\n').findIndex((l) => l.includes('rngs=')) + 1} reused-key`]);
    const split = `${flax}\n\ndef mc(params, x, key):\n    model = LeafMLP()\n    keys = jax.random.split(key, 20)\n    return jnp.stack([model.apply(params, x, rngs={"dropout": k}) for k in keys])\n`;
    expect(await run({ 'leaf.py': split })).toEqual([]);
    const folded = `${flax}\n\ndef mc(params, x, key):\n    model = LeafMLP()\n    return jnp.stack([model.apply(params, x, rngs={"dropout": jax.random.fold_in(key, i)}) for i in range(20)])\n`;
    expect(await run({ 'leaf.py': folded })).toEqual([]);
  });

  it('fires on deterministic=True in a sampling loop, not on deterministic=False', async () => {
    const off = `${flax}\n\ndef mc(params, x, key):\n    model = LeafMLP()\n    outs = []\n    for i in range(20):\n        outs.append(model.apply(params, x, deterministic=True, rngs={"dropout": jax.random.fold_in(key, i)}))\n    return jnp.stack(outs)\n`;
    expect(await run({ 'leaf.py': off })).toEqual([`leaf.py:${off.split('\n').findIndex((l) => l.includes('deterministic=True')) + 1} deterministic-dropout`]);
    expect(await run({ 'leaf.py': off.replace('deterministic=True', 'deterministic=False') })).toEqual([]);
  });
});
