// unexplained-allow: a suppression comment without a reason, or naming a rule that does not exist.
import { defineRule } from '../../server/src/engine/api';
import { SUPPRESSION_PATTERN } from '../../server/src/engine/suppress';

/** Rule ids known to the registry, set by the registry at load time to avoid an import cycle. */
const knownIds = new Set<string>();

/** Tells this rule which rule ids exist. */
export function setKnownRuleIds(ids: Iterable<string>): void {
  knownIds.clear();
  for (const id of ids) knownIds.add(id);
}

export const rule = defineRule({
  meta: {
    id: 'unexplained-allow',
    title: 'Suppression comment without a reason',
    family: 'evaluation',
    defaultSeverity: 'information',
    status: { stage: 'stable', since: '0.1.0' },
    fix: 'none',
    messages: {
      missingReason: 'This `allow[{rules}]` gives no reason: say why the finding does not apply here, after the closing bracket, so a reviewer can check it.',
      unknownRule: '`{rule}` is not a noisewise rule id, so this comment suppresses nothing (run `noisewise rules` for the list).',
      emptyList: 'This suppression names no rule: put the rule id between the brackets.',
    },
    settings: [],
  },
  create(context) {
    return {
      comment(node) {
        const match = SUPPRESSION_PATTERN.exec(node.text.trim());
        if (!match) return;
        const rules = match[2]!
          .split(',')
          .map((r) => r.trim())
          .filter(Boolean);
        if (rules.length === 0) {
          context.report({ node, messageId: 'emptyList' });
          return;
        }
        for (const id of rules) if (knownIds.size > 0 && !knownIds.has(id)) context.report({ node, messageId: 'unknownRule', data: { rule: id } });
        if (match[3]!.trim() === '') context.report({ node, messageId: 'missingReason', data: { rules: rules.join(', ') } });
      },
    };
  },
});
