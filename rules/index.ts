// The rule registry: one import per rule folder, alphabetical (a test checks that the folders and this list agree).
import type { Rule } from '../server/src/engine/api';
import elboScaleMismatchDoc from './elbo-scale-mismatch/doc.md?raw';
import { rule as elboScaleMismatch } from './elbo-scale-mismatch/rule';
import logitSpaceAverageDoc from './logit-space-average/doc.md?raw';
import { rule as logitSpaceAverage } from './logit-space-average/rule';
import noiselessMcEvaluationDoc from './noiseless-mc-evaluation/doc.md?raw';
import { rule as noiselessMcEvaluation } from './noiseless-mc-evaluation/rule';
import unboundedNoiseRateDoc from './unbounded-noise-rate/doc.md?raw';
import { rule as unboundedNoiseRate } from './unbounded-noise-rate/rule';
import unconstrainedStdDoc from './unconstrained-std/doc.md?raw';
import { rule as unconstrainedStd } from './unconstrained-std/rule';
import unexplainedAllowDoc from './unexplained-allow/doc.md?raw';
import { rule as unexplainedAllow, setKnownRuleIds } from './unexplained-allow/rule';

/** A rule with its bundled page. */
export interface RegisteredRule extends Rule {
  /** The rule page (Markdown), bundled so hovers and `noisewise explain` work offline. */
  doc: string;
}

/** Every rule, sorted by id. */
export const allRules: RegisteredRule[] = [
  { ...elboScaleMismatch, doc: elboScaleMismatchDoc },
  { ...logitSpaceAverage, doc: logitSpaceAverageDoc },
  { ...noiselessMcEvaluation, doc: noiselessMcEvaluationDoc },
  { ...unboundedNoiseRate, doc: unboundedNoiseRateDoc },
  { ...unconstrainedStd, doc: unconstrainedStdDoc },
  { ...unexplainedAllow, doc: unexplainedAllowDoc },
];

/** The rule with an id, if there is one. */
export function findRule(id: string): RegisteredRule | undefined {
  return allRules.find((r) => r.meta.id === id);
}

setKnownRuleIds(allRules.map((r) => r.meta.id));
