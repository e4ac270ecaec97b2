// Checks the numbers behind logit-space-average against SOURCES.md §9: the MC predictive log-probability of the
// worked example (log-mean-exp) versus the mean of the log-probabilities, and the log T figure shown in hovers.
import { describe, expect, it } from 'vitest';
import { arithmeticMean, logMeanExp } from '../rules/logit-space-average/rule';
import { checkTexts } from './helpers/engine';

/** SOURCES.md §9: MC predictive, T = 2, true-class probabilities [0.9, 0.1]. */
const WORKED_EXAMPLE = [0.9, 0.1];

describe('logit-space-average numbers', () => {
  it('log-mean-exp of the worked example is ln 0.5', () => {
    const logs = WORKED_EXAMPLE.map(Math.log);
    // SOURCES.md §9: log-mean = ln 0.5 = −0.6931472 (= logsumexp − ln 2); §4: Gal & Ghahramani 2016, predictive log-likelihood.
    expect(logMeanExp(logs)).toBeCloseTo(-0.6931472, 7);
  });

  it('the mean of the logs of the worked example is the wrong value −1.2039728', () => {
    const logs = WORKED_EXAMPLE.map(Math.log);
    // SOURCES.md §9: mean-of-logs = −1.2039728 (the wrong value).
    expect(arithmeticMean(logs)).toBeCloseTo(-1.2039728, 7);
  });

  it('the mean of the logs is below the log-mean-exp (Jensen)', () => {
    const logs = WORKED_EXAMPLE.map(Math.log);
    // SOURCES.md §4: "The mean of log p_t is a lower value (Jensen)"; the gap for the worked example is 0.5108256.
    expect(logMeanExp(logs) - arithmeticMean(logs)).toBeCloseTo(-0.6931472 - -1.2039728, 7);
    expect(arithmeticMean(logs)).toBeLessThan(logMeanExp(logs));
  });

  it('log-mean-exp stays finite where exponentials underflow', () => {
    // Common practice: the max-shift makes logsumexp exact for very negative inputs; ln(mean(e^-1000, e^-1000)) = −1000.
    expect(logMeanExp([-1000, -1000])).toBeCloseTo(-1000, 9);
  });

  it('the hover shows T and the log T the log-mean-exp subtracts', async () => {
    const source = [
      'import torch',
      'import torch.nn.functional as F',
      'from torch import nn',
      '',
      '',
      'class Net(nn.Module):',
      '    def __init__(self):',
      '        super().__init__()',
      '        self.head = nn.Linear(4, 3)',
      '',
      '    def forward(self, x):',
      '        return self.head(F.dropout(x, 0.5))',
      '',
      '',
      'def predict(model, x):',
      '    logits = torch.stack([model(x) for _ in range(2)])',
      '    return F.softmax(logits.mean(0), dim=-1)',
      '',
    ].join('\n');
    const [report] = await checkTexts({ 'predict.py': source }, ['logit-space-average']);
    const finding = report!.findings[0]!;
    expect(finding.figures.find((f) => f.label.startsWith('samples averaged'))?.value).toBe(2);
    const logT = Number(finding.figures.find((f) => f.label.startsWith('log T'))?.value);
    // SOURCES.md §9: ln 2 = 0.6931472 (the worked example's logsumexp − log-mean); the figure has 4 significant digits.
    expect(logT).toBeCloseTo(0.6931472, 4);
  });
});
