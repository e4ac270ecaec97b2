// Unit tests of unbounded-noise-rate: the standard normal CDF behind its figures, the figures in its findings, and
// the per-finding severity of a bound above α = 1 (including how it meets configured severities).
import { execFileSync } from 'node:child_process';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { dropRateOfAlpha, erfc, normalCdf, signFlipProbability } from '../rules/unbounded-noise-rate/normal-cdf';
import { applyOp, invertOp } from '../rules/unbounded-noise-rate/rate-walk';
import type { SyntaxNode } from '../server/src/engine/api';
import { checkSources } from '../server/src/engine/check';
import type { ConfiguredSeverity } from '../server/src/engine/finding';
import { checkTexts } from './helpers/engine';

const RULE = 'unbounded-noise-rate';

/** Checks one in-memory file with a configured severity for the rule. */
async function checkWithSeverity(text: string, severity?: ConfiguredSeverity) {
  const root = path.resolve('/virtual-noise-rate');
  const reports = await checkSources([{ path: 'layer.py', absPath: path.join(root, 'layer.py'), text }], {
    workspaceRoot: root,
    settingsFor: () => {
      const configured: Record<string, ConfiguredSeverity> = {};
      if (severity) configured[RULE] = severity;
      return { severity: configured, datasetSizeNames: [] };
    },
    rules: { only: [RULE] },
  });
  return reports[0]!.findings.filter((f) => f.rule === RULE);
}

async function findings(text: string) {
  const reports = await checkTexts({ 'layer.py': text }, [RULE]);
  return reports[0]!.findings.filter((f) => f.rule === RULE);
}

/** A printed four-decimal table value covers the true value to within half a unit in the last place. */
function expectTableValue(actual: number, table: number): void {
  expect(Math.abs(actual - table)).toBeLessThanOrEqual(0.5e-4 + 1e-12);
}

function figure(f: { figures: { label: string; value: number | string }[] }, label: string): number | string | undefined {
  return f.figures.find((x) => x.label === label)?.value;
}

describe('standard normal CDF', () => {
  // Check values: a printed standard normal table, four decimals (from memory: Φ(−1) = 0.1587, Φ(−0.5) = 0.3085,
  // Φ(−2) = 0.0228, Φ(−3) = 0.0013, Φ(−1.96) = 0.0250, Φ(0) = 0.5000).
  it.each([
    [-1, 0.1587],
    [-0.5, 0.3085],
    [-2, 0.0228],
    [-3, 0.0013],
    [-1.96, 0.025],
    [0, 0.5],
    [1, 0.8413],
  ])('Φ(%d) matches the normal table value %d to four decimals', (z, table) => {
    expectTableValue(normalCdf(z), table);
  });

  it('is symmetric and monotone', () => {
    for (let z = -8; z <= 8; z += 0.25) {
      expect(normalCdf(z) + normalCdf(-z)).toBeCloseTo(1, 14);
      expect(normalCdf(z + 0.25)).toBeGreaterThan(normalCdf(z));
    }
  });

  it("agrees with Python's math.erfc (a general-purpose library) to 1e-13 relative, tails included", () => {
    const xs = [0, 1e-6, 0.1, 0.5, 0.7071067811865476, 1, 1.5, 2, 2.4999, 2.5, 2.5001, 3, 4, 5, 6, 8, 10, 15, 20, 26, -0.3, -1, -2.5, -4];
    const script = 'import json, math, sys\nprint(json.dumps([math.erfc(x) for x in json.loads(sys.argv[1])]))';
    const reference = JSON.parse(execFileSync('python3', ['-c', script, JSON.stringify(xs)], { encoding: 'utf8' })) as number[];
    xs.forEach((x, i) => {
      const want = reference[i]!;
      expect(Math.abs(erfc(x) - want) / want, `erfc(${x})`).toBeLessThan(1e-13);
    });
  });
});

describe('gradient sign-flip probability Φ(−1/√α)', () => {
  it('follows the normal table at α = 1, 4 and 0.25', () => {
    // α = 1 → Φ(−1), α = 4 → Φ(−0.5), α = 0.25 → Φ(−2): standard normal table (from memory).
    expectTableValue(signFlipProbability(1), 0.1587);
    expectTableValue(signFlipProbability(4), 0.3085);
    expectTableValue(signFlipProbability(0.25), 0.0228);
    expect(signFlipProbability(Number.POSITIVE_INFINITY)).toBe(0.5);
    expect(signFlipProbability(0)).toBe(0);
  });

  it('is the probability that the noise factor 1 + √α·ε is negative (seeded simulation, within 4 standard errors)', () => {
    // A deterministic xorshift generator and Box–Muller: the check value is the formula's own meaning.
    let state = 0x2545f491;
    const uniform = () => {
      state ^= state << 13;
      state ^= state >>> 17;
      state ^= state << 5;
      return ((state >>> 0) + 0.5) / 4294967296;
    };
    const n = 200_000;
    for (const alpha of [0.25, 1, 4]) {
      let negative = 0;
      for (let i = 0; i < n; i++) {
        const eps = Math.sqrt(-2 * Math.log(uniform())) * Math.cos(2 * Math.PI * uniform());
        if (1 + Math.sqrt(alpha) * eps < 0) negative++;
      }
      const p = signFlipProbability(alpha);
      expect(Math.abs(negative / n - p)).toBeLessThan(4 * Math.sqrt((p * (1 - p)) / n));
    }
  });

  it('maps α to the Gaussian-dropout drop rate p = α/(1 + α) as in SOURCES.md §9', () => {
    // SOURCES.md §9: p = 0.5 → α = 1; p = 0.2 → α = 0.25; p = 0.1 → α = 0.11111; log α = 3 → α = 20.0855 → p = 0.952574.
    expect(dropRateOfAlpha(1)).toBe(0.5);
    expect(dropRateOfAlpha(0.25)).toBeCloseTo(0.2, 12);
    expect(dropRateOfAlpha(0.11111)).toBeCloseTo(0.1, 5);
    expect(Math.exp(3)).toBeCloseTo(20.0855, 4);
    expect(dropRateOfAlpha(Math.exp(3))).toBeCloseTo(0.952574, 6);
  });
});

const UNBOUNDED = `import math
import torch
from torch import nn


class BandNoise(nn.Module):
    def __init__(self, n, p_init=0.2):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.full((n,), math.log(p_init / (1.0 - p_init))))

    def forward(self, x):
        return x * (1 + torch.exp(0.5 * self.log_alpha) * torch.randn_like(x))
`;

const PRUNE_BOUND = `import torch
from torch import nn


class BandNoise(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.log_alpha = nn.Parameter(torch.zeros(n))

    def forward(self, x):
        return x * (1 + torch.exp(0.5 * self.log_alpha.clamp(max=3.0)) * torch.randn_like(x))
`;

const CAP_FOUR = `import torch
from torch import nn


class BandNoise(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.raw = nn.Parameter(torch.zeros(n))

    def forward(self, x):
        return x * (1 + (4.0 * torch.sigmoid(self.raw)).sqrt() * torch.randn_like(x))
`;

describe('figures in findings', () => {
  it('states the initial α, its drop rate and its sign-flip probability, and Φ(−1) at α = 1', async () => {
    const [f] = await findings(UNBOUNDED);
    expect(f?.messageId).toBe('unbounded');
    // p_init = 0.2 → α = 0.25 (SOURCES.md §9) → Φ(−2) = 0.0228 (normal table).
    expect(Number(figure(f!, 'initial α'))).toBeCloseTo(0.25, 10);
    expect(Number(figure(f!, 'initial drop rate p = α/(1 + α)'))).toBeCloseTo(0.2, 10);
    expectTableValue(Number(figure(f!, 'initial gradient sign-flip probability Φ(−1/√α)')), 0.0228);
    expectTableValue(Number(figure(f!, 'gradient sign-flip probability at α = 1 (drop rate 0.5)')), 0.1587);
    expect(f!.message).toContain('0.1587 at α = 1');
  });

  it('states the bound for log α ≤ 3: α = 20.09, drop rate 0.9526 (SOURCES.md §9) and Φ(−1/√α) = 0.4117', async () => {
    const [f] = await findings(PRUNE_BOUND);
    expect(f?.messageId).toBe('loose-bound');
    expect(Number(figure(f!, 'largest allowed α'))).toBeCloseTo(20.0855, 2);
    expect(Number(figure(f!, 'largest allowed drop rate p = α/(1 + α)'))).toBeCloseTo(0.952574, 4);
    // Φ(−1/√e³) from Python's math.erfc (a general-purpose library), rounded as the message rounds.
    const reference = Number(execFileSync('python3', ['-c', 'import math; print(0.5 * math.erfc(math.exp(-1.5) / math.sqrt(2)))'], { encoding: 'utf8' }));
    expect(Number(figure(f!, 'largest allowed gradient sign-flip probability Φ(−1/√α)'))).toBeCloseTo(reference, 4);
    expect(f!.message).toContain('α ≤ 20.09 (log α ≤ 3, drop rate 0.9526)');
  });

  it('states the bound of α = 4·sigmoid(ρ): Φ(−0.5) = 0.3085 (normal table)', async () => {
    const [f] = await findings(CAP_FOUR);
    expect(f?.messageId).toBe('loose-bound');
    expect(figure(f!, 'largest allowed α')).toBe('4');
    expectTableValue(Number(figure(f!, 'largest allowed gradient sign-flip probability Φ(−1/√α)')), 0.3085);
  });

  it('states the intended and the used noise std when α is written as the std (SOURCES.md §9: p = 0.2 → α = 0.25, std 0.5)', async () => {
    const [f] = await findings(`import torch
from torch import nn


class BandDropout(nn.Module):
    def __init__(self, p=0.2):
        super().__init__()
        self.alpha = p / (1 - p)

    def forward(self, x):
        return x * (torch.randn_like(x) * self.alpha + 1)
`);
    expect(f?.messageId).toBe('variance-as-std');
    expect(Number(figure(f!, 'α (the intended noise variance)'))).toBeCloseTo(0.25, 10);
    expect(Number(figure(f!, 'intended noise std √α'))).toBeCloseTo(0.5, 10);
    expect(Number(figure(f!, 'noise variance used here (α²)'))).toBeCloseTo(0.0625, 10);
  });

  it('uses p = 0.1 → α = 0.11111, std 0.33333 (SOURCES.md §9)', async () => {
    const [f] = await findings(`import torch
from torch import nn


class BandDropout(nn.Module):
    def __init__(self, p=0.1):
        super().__init__()
        self.alpha = p / (1 - p)

    def forward(self, x):
        return x * (1 + self.alpha * torch.randn_like(x))
`);
    expect(Number(figure(f!, 'α (the intended noise variance)'))).toBeCloseTo(0.11111, 4);
    expect(Number(figure(f!, 'intended noise std √α'))).toBeCloseTo(0.33333, 4);
  });
});

describe('severity of a bound above α = 1', () => {
  it('is information by default while an unbounded α keeps the rule severity', async () => {
    expect((await checkWithSeverity(PRUNE_BOUND)).map((f) => f.severity)).toEqual(['information']);
    expect((await checkWithSeverity(UNBOUNDED)).map((f) => f.severity)).toEqual(['warning']);
  });

  it('never exceeds a configured severity and disappears when the rule is off', async () => {
    expect((await checkWithSeverity(PRUNE_BOUND, 'error')).map((f) => f.severity)).toEqual(['information']);
    expect((await checkWithSeverity(UNBOUNDED, 'error')).map((f) => f.severity)).toEqual(['error']);
    expect((await checkWithSeverity(PRUNE_BOUND, 'hint')).map((f) => f.severity)).toEqual(['hint']);
    expect((await checkWithSeverity(PRUNE_BOUND, 'info')).map((f) => f.severity)).toEqual(['information']);
    expect(await checkWithSeverity(PRUNE_BOUND, 'off')).toEqual([]);
    expect(await checkWithSeverity(UNBOUNDED, 'off')).toEqual([]);
  });
});

describe('boundedness from the data flow', () => {
  it('is quiet at α ≤ 1 in every spelling of the bound', async () => {
    for (const bound of ['self.log_alpha.clamp(max=0.0)', 'torch.clamp(self.log_alpha, -8.0, 0.0)', 'torch.clamp(self.log_alpha, max=0)', 'self.log_alpha.clamp_max(0.0)', 'torch.minimum(self.log_alpha, torch.tensor(0.0))', 'self.log_alpha.clip(max=-1.0)']) {
      const text = UNBOUNDED.replace('torch.exp(0.5 * self.log_alpha)', `torch.exp(0.5 * ${bound})`);
      expect(await findings(text), bound).toEqual([]);
    }
  });

  it('reads an in-place clamp applied after the optimiser step as a bound', async () => {
    const training = `

def train_step(model, optimizer, loss):
    optimizer.zero_grad()
    loss.backward()
    optimizer.step()
    for name, p in model.named_parameters():
        if "log_alpha" in name:
            p.data.clamp_(max=CAP)
`;
    expect(await findings(`${UNBOUNDED}${training.replace('CAP', '0.0')}`)).toEqual([]);
    const loose = await findings(`${UNBOUNDED}${training.replace('CAP', '8.0')}`);
    expect(loose.map((f) => f.messageId)).toEqual(['loose-bound']);
  });

  it('follows α into another file through a base class and a helper that receives it', async () => {
    const reports = await checkTexts(
      {
        'base.py': 'import torch\nfrom torch import nn\n\n\nclass Base(nn.Module):\n    def __init__(self, n):\n        super().__init__()\n        self.log_alpha = nn.Parameter(torch.zeros(n))\n',
        'noise.py': 'import torch\n\n\ndef gaussian_dropout(x, log_alpha):\n    return x * (1 + (0.5 * log_alpha).exp() * torch.randn_like(x))\n',
        'layer.py': 'from base import Base\nfrom noise import gaussian_dropout\n\n\nclass Layer(Base):\n    def forward(self, x):\n        return gaussian_dropout(x, self.log_alpha)\n',
      },
      [RULE],
    );
    const layer = reports.find((r) => r.path === 'layer.py')!;
    expect(layer.findings.map((f) => [f.messageId, layer.text.slice(f.start, f.end)])).toEqual([['unbounded', 'self.log_alpha']]);
    expect(reports.filter((r) => r.path !== 'layer.py').flatMap((r) => r.findings)).toEqual([]);
  });
});

const LEARNED_RATE = `import torch
from torch import nn


class SoilDropout(nn.Module):
    def __init__(self, n):
        super().__init__()
        self.p_logit = nn.Parameter(torch.full((n,), -1.3862944))

    def forward(self, x):
        p = RATE
        alpha = p / (1 - p)
        return x * (1 + alpha.sqrt() * torch.randn_like(x))
`;

describe('α as the odds p/(1 − p) of a learned drop rate', () => {
  it('maps p to α as in SOURCES.md §9 and back', () => {
    const odds = { kind: 'odds' as const, eps: 0, node: null as unknown as SyntaxNode };
    // SOURCES.md §9: p = 0.1 → α = 0.11111; p = 0.2 → α = 0.25; p = 0.5 → α = 1.
    expect(applyOp(odds, 0.1)).toBeCloseTo(0.11111, 5);
    expect(applyOp(odds, 0.2)).toBeCloseTo(0.25, 12);
    expect(applyOp(odds, 0.5)).toBe(1);
    expect(invertOp(odds, 1)).toBe(0.5);
    expect(invertOp(odds, 0.25)).toBeCloseTo(0.2, 12);
    // The odds grow without limit as p → 1: a sigmoid bounds p, not α.
    expect(applyOp(odds, 1)).toBe(Number.POSITIVE_INFINITY);
    expect(applyOp(odds, applyOp({ kind: 'sigmoid' }, Number.POSITIVE_INFINITY))).toBe(Number.POSITIVE_INFINITY);
    // From memory (the logistic function's defining identity): for p = sigmoid(z), p/(1 − p) = e^z, so α = exp(z).
    for (const z of [-3, -1.3862944, 0, 2, 5]) expect(applyOp(odds, applyOp({ kind: 'sigmoid' }, z)) / Math.exp(z)).toBeCloseTo(1, 10);
    // An epsilon in the denominator caps the odds at 1/eps: p/(1 − p + 1e-6) ≤ 1/1e-6 at p = 1.
    expect(applyOp({ ...odds, eps: 1e-6 }, 1)).toBeCloseTo(1e6, 3);
  });

  it('fires when only p is bounded by the sigmoid, and states the initial α = 0.25 at p = 0.2 (SOURCES.md §9)', async () => {
    const [f] = await findings(LEARNED_RATE.replace('RATE', 'torch.sigmoid(self.p_logit)'));
    expect(f?.messageId).toBe('unbounded');
    expect(Number(figure(f!, 'initial α'))).toBeCloseTo(0.25, 6);
    expect(Number(figure(f!, 'initial drop rate p = α/(1 + α)'))).toBeCloseTo(0.2, 6);
  });

  it('is quiet when p ≤ 0.5 (α ≤ 1, SOURCES.md §9) in each spelling of the bound', async () => {
    for (const rate of ['torch.sigmoid(self.p_logit).clamp(max=0.5)', 'torch.clamp(torch.sigmoid(self.p_logit), 0.0, 0.5)', 'torch.sigmoid(self.p_logit.clamp(max=0.0))', '0.5 * torch.sigmoid(self.p_logit)']) {
      expect(await findings(LEARNED_RATE.replace('RATE', rate)), rate).toEqual([]);
    }
  });

  it('states the bound of p ≤ 0.9: α = 0.9/0.1 = 9 and Φ(−1/3) by math.erfc', async () => {
    const [f] = await findings(LEARNED_RATE.replace('RATE', 'torch.sigmoid(self.p_logit).clamp(max=0.9)'));
    expect(f?.messageId).toBe('loose-bound');
    expect(Number(figure(f!, 'largest allowed α'))).toBeCloseTo(9, 10);
    expect(Number(figure(f!, 'largest allowed drop rate p = α/(1 + α)'))).toBeCloseTo(0.9, 10);
    // Φ(−1/√9) from Python's math.erfc (a general-purpose library), rounded as the figure rounds.
    const reference = Number(execFileSync('python3', ['-c', 'import math; print(0.5 * math.erfc(1 / 3 / math.sqrt(2)))'], { encoding: 'utf8' }));
    expect(Number(figure(f!, 'largest allowed gradient sign-flip probability Φ(−1/√α)'))).toBeCloseTo(reference, 4);
    // The fix lowers the cap to the p at which α = 1: p = 0.5 (SOURCES.md §9).
    expect(f!.fixes[0]?.edits.map((e) => e.newText)).toEqual(['0.5']);
  });
});

describe('an epsilon on the noise std', () => {
  it('does not bound α: the relative std with + 1e-8 still fires', async () => {
    const layer = `import torch
import torch.nn.functional as F
from torch import nn
from torch.distributions import Normal


class LeafVD(nn.Module):
    def __init__(self, n_in, n_out):
        super().__init__()
        self.theta = nn.Parameter(torch.randn(n_out, n_in) * 0.05)
        self.log_alpha = nn.Parameter(torch.full((n_out, n_in), -4.0))

    def forward(self, x):
        return F.linear(x, Normal(self.theta, torch.exp(0.5 * LA) * self.theta.abs() + 1e-8).rsample())
`;
    const [f] = await findings(layer.replace('LA', 'self.log_alpha'));
    expect(f?.messageId).toBe('unbounded');
    // log α = −4 → α = e⁻⁴ (from memory: e⁻⁴ = 0.0183156), shown to four significant digits.
    expect(Number(figure(f!, 'initial α'))).toBeCloseTo(0.0183156, 5);
    expect(await findings(layer.replace('LA', 'self.log_alpha.clamp(max=0.0)'))).toEqual([]);
  });

  it('leaves a clamp at log α = 0 quiet when the epsilon is added to the std (α ≤ (1 + 1e-8)²)', async () => {
    const text = UNBOUNDED.replace('torch.exp(0.5 * self.log_alpha)', '(torch.exp(0.5 * self.log_alpha.clamp(max=0.0)) + 1e-8)');
    expect(await findings(text)).toEqual([]);
    // A real loosening is still reported: log α ≤ 0.1 is α ≤ e^0.1 = 1.105 (from memory: e^0.1 = 1.1052).
    const loose = await findings(UNBOUNDED.replace('torch.exp(0.5 * self.log_alpha)', '(torch.exp(0.5 * self.log_alpha.clamp(max=0.1)) + 1e-8)'));
    expect(loose.map((f) => f.messageId)).toEqual(['loose-bound']);
    expect(Number(figure(loose[0]!, 'largest allowed α'))).toBeCloseTo(1.1052, 3);
  });
});
