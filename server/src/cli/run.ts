// Dispatches a command line to its command and turns every failure into a message and an exit code.
import { ConfigError } from '../engine/config';
import { helpText, parseArgs } from './args';
import { type CheckDeps, runCheck } from './check-command';
import type { RuleEntry } from './format/common';
import { useColor } from './format/text';
import { type CliIo, EXIT, UsageError } from './io';
import { PRODUCT_NAME, VERSION } from './product';
import { findRule, formatExplain, formatRulesTable } from './rules-command';

/** Runs the CLI with the arguments after the program name and returns the exit code. */
export async function runCli(argv: string[], io: CliIo, deps: CheckDeps): Promise<number> {
  try {
    const parsed = parseArgs(argv);
    const color = (flag: boolean): boolean => useColor({ isTTY: io.stdout.isTTY, env: io.env, noColorFlag: !flag });
    switch (parsed.command) {
      case 'help':
        io.stdout.write(helpText(parsed.topic));
        return EXIT.ok;
      case 'version':
        io.stdout.write(`${PRODUCT_NAME} ${VERSION}\n`);
        return EXIT.ok;
      case 'rules':
        io.stdout.write(formatRulesTable(deps.rules, { color: color(parsed.color) }));
        return EXIT.ok;
      case 'explain': {
        const rule = findRule(deps.rules, parsed.rule);
        if (!rule) {
          io.stderr.write(`${PRODUCT_NAME}: unknown rule "${parsed.rule}". The rules are:\n${ruleIdList(deps.rules)}`);
          return EXIT.error;
        }
        io.stdout.write(formatExplain(rule, { color: color(parsed.color) }));
        return EXIT.ok;
      }
      case 'check':
        return await runCheck(parsed.options, io, deps);
    }
  } catch (error) {
    if (error instanceof UsageError) {
      const help = error.command ? `${PRODUCT_NAME} ${error.command} --help` : `${PRODUCT_NAME} --help`;
      io.stderr.write(`${PRODUCT_NAME}: ${error.message}\nRun \`${help}\` for usage.\n`);
      if (!error.command) io.stderr.write(`\n${helpText(null)}`);
      return EXIT.error;
    }
    if (error instanceof ConfigError) {
      io.stderr.write(`${PRODUCT_NAME}: configuration error: ${error.message}\n`);
      return EXIT.error;
    }
    const err = error as Error;
    io.stderr.write(`${PRODUCT_NAME}: internal error: ${err?.stack ?? String(error)}\n`);
    return EXIT.error;
  }
}

function ruleIdList(rules: readonly RuleEntry[]): string {
  return rules
    .map((r) => r.meta.id)
    .sort()
    .map((id) => `  ${id}\n`)
    .join('');
}
