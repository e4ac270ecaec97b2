// What every rule declares about itself: identity, family, default severity, status, fix availability, messages, settings.
import type { Severity } from './finding';

/** The kind of model code a rule is about. */
export type RuleFamily = 'variational' | 'mc-dropout' | 'ensemble' | 'ppl' | 'evaluation';

/** Lifecycle of a rule, with the version in which the status took effect. */
export interface RuleStatus {
  stage: 'experimental' | 'stable' | 'deprecated';
  since: string;
}

/** Static description of a rule; the rule page header and `noisewise rules` are generated from it. */
export interface RuleMeta {
  /** kebab-case id, equal to the rule's folder name; names the mistake, reads well after "allow". */
  id: string;
  /** One line; equals the rule page's title. */
  title: string;
  family: RuleFamily;
  defaultSeverity: Severity;
  status: RuleStatus;
  /** Whether the rule offers fixes: never, for some findings, or for every finding. */
  fix: 'none' | 'sometimes' | 'always';
  /** Message templates keyed by message id, with `{placeholder}`s filled from the report's data. */
  messages: Record<string, string>;
  /** Settings keys the rule reads (e.g. `dataset-size-names`). */
  settings: string[];
}
