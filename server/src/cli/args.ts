// Hand-written command-line parsing: turns argv into one of the commands (check, rules, explain, help, version) or a UsageError.
import { UsageError } from './io';

/** Output formats of `noisewise check`. */
export const FORMATS = ['text', 'json', 'sarif', 'github'] as const;
/** An output format of `noisewise check`. */
export type OutputFormat = (typeof FORMATS)[number];

/** Severity thresholds accepted by `--fail-on`. */
export const FAIL_LEVELS = ['error', 'warning', 'info'] as const;
/** A `--fail-on` threshold. */
export type FailLevel = (typeof FAIL_LEVELS)[number];

/** Options of `noisewise check`. */
export interface CheckOptions {
  paths: string[];
  format: OutputFormat;
  output: string | null;
  fix: boolean;
  diff: boolean;
  failOn: FailLevel;
  rules: string[];
  skip: string[];
  exitZero: boolean;
  color: boolean;
  /** Worker threads for the check: null = as many as the machine has cores (capped), 1 = in this thread. */
  jobs: number | null;
}

/** A parsed command line. */
export type ParsedCommand =
  | { command: 'check'; options: CheckOptions }
  | { command: 'rules'; color: boolean }
  | { command: 'explain'; rule: string; color: boolean }
  | { command: 'help'; topic: string | null }
  | { command: 'version' };

/** Commands and their one-line descriptions, in the order the help lists them. */
export const COMMANDS: ReadonlyArray<[name: string, summary: string]> = [
  ['check', 'Check Python files and notebooks (default path: the current folder).'],
  ['rules', 'List every rule with its family, default severity and fix availability.'],
  ['explain', 'Print the page of one rule.'],
  ['server', 'Run the language server over standard input and output (`noisewise server --stdio`).'],
];

/** Reads the value of an option given as `--name value` or `--name=value`. */
function takeValue(argv: string[], i: number, name: string, inline: string | undefined, command: string): [string, number] {
  if (inline !== undefined) {
    if (inline === '') throw new UsageError(`option ${name} needs a value`, command);
    return [inline, i];
  }
  const next = argv[i + 1];
  if (next === undefined || (next.startsWith('-') && next !== '-')) throw new UsageError(`option ${name} needs a value`, command);
  return [next, i + 1];
}

function oneOf<T extends string>(value: string, allowed: readonly T[], name: string, command: string): T {
  if ((allowed as readonly string[]).includes(value)) return value as T;
  throw new UsageError(`${name} must be one of ${allowed.join(', ')} (got "${value}")`, command);
}

/** Splits `--name=value` into its parts; other arguments come back unchanged. */
function splitInline(arg: string): [string, string | undefined] {
  if (!arg.startsWith('--')) return [arg, undefined];
  const eq = arg.indexOf('=');
  return eq === -1 ? [arg, undefined] : [arg.slice(0, eq), arg.slice(eq + 1)];
}

/** Parses the arguments after the program name. Throws UsageError for anything it does not understand. */
export function parseArgs(argv: string[]): ParsedCommand {
  const [first, ...rest] = argv;
  if (first === undefined) throw new UsageError('no command given');
  if (first === '--help' || first === '-h' || first === 'help') {
    const topic = first === 'help' ? (rest[0] ?? null) : null;
    if (topic !== null && !COMMANDS.some(([name]) => name === topic)) throw new UsageError(`unknown command "${topic}"`);
    return { command: 'help', topic };
  }
  if (first === '--version' || first === '-V') return { command: 'version' };
  switch (first) {
    case 'check':
      return parseCheck(rest);
    case 'rules':
      return parseRules(rest);
    case 'explain':
      return parseExplain(rest);
    // `server` never reaches this parser: main.ts hands it to the language server before parsing, because from then
    // on standard output belongs to the protocol.
    default:
      if (first.startsWith('-')) throw new UsageError(`unknown option ${first} (options go after the command)`);
      throw new UsageError(`unknown command "${first}"`);
  }
}

function parseCheck(argv: string[]): ParsedCommand {
  const options: CheckOptions = {
    paths: [],
    format: 'text',
    output: null,
    fix: false,
    diff: false,
    failOn: 'warning',
    rules: [],
    skip: [],
    exitZero: false,
    color: true,
    jobs: null,
  };
  let onlyPaths = false;
  for (let i = 0; i < argv.length; i++) {
    const arg = argv[i]!;
    if (onlyPaths || !arg.startsWith('-') || arg === '-') {
      if (arg === '-') throw new UsageError('reading from standard input is not supported; name files or folders', 'check');
      options.paths.push(arg);
      continue;
    }
    if (arg === '--') {
      onlyPaths = true;
      continue;
    }
    const [name, inline] = splitInline(arg);
    const flag = (): void => {
      if (inline !== undefined) throw new UsageError(`option ${name} takes no value`, 'check');
    };
    let value: string;
    switch (name) {
      case '--help':
      case '-h':
        return { command: 'help', topic: 'check' };
      case '--format':
        [value, i] = takeValue(argv, i, name, inline, 'check');
        options.format = oneOf(value, FORMATS, '--format', 'check');
        break;
      case '--output':
        [value, i] = takeValue(argv, i, name, inline, 'check');
        options.output = value;
        break;
      case '--jobs':
        [value, i] = takeValue(argv, i, name, inline, 'check');
        if (!/^[1-9]\d{0,2}$/.test(value)) throw new UsageError(`--jobs must be a whole number from 1 to 999 (got "${value}")`, 'check');
        options.jobs = Number(value);
        break;
      case '--fail-on':
        [value, i] = takeValue(argv, i, name, inline, 'check');
        options.failOn = oneOf(value, FAIL_LEVELS, '--fail-on', 'check');
        break;
      case '--rule':
      case '--skip':
        [value, i] = takeValue(argv, i, name, inline, 'check');
        for (const id of value.split(',')) {
          const trimmed = id.trim();
          if (trimmed === '') throw new UsageError(`option ${name} needs a rule id`, 'check');
          (name === '--rule' ? options.rules : options.skip).push(trimmed);
        }
        break;
      case '--fix':
        flag();
        options.fix = true;
        break;
      case '--diff':
        flag();
        options.diff = true;
        break;
      case '--exit-zero':
        flag();
        options.exitZero = true;
        break;
      case '--no-color':
        flag();
        options.color = false;
        break;
      default:
        throw new UsageError(`unknown option ${name}`, 'check');
    }
  }
  if (options.paths.length === 0) options.paths.push('.');
  if (options.diff && options.output === null && (options.format === 'json' || options.format === 'sarif')) {
    throw new UsageError(`--diff prints patches on standard output; with --format ${options.format} give --output FILE for the report`, 'check');
  }
  return { command: 'check', options };
}

function parseRules(argv: string[]): ParsedCommand {
  let color = true;
  for (const arg of argv) {
    if (arg === '--help' || arg === '-h') return { command: 'help', topic: 'rules' };
    if (arg === '--no-color') color = false;
    else if (arg.startsWith('-')) throw new UsageError(`unknown option ${arg}`, 'rules');
    else throw new UsageError(`unexpected argument "${arg}"`, 'rules');
  }
  return { command: 'rules', color };
}

function parseExplain(argv: string[]): ParsedCommand {
  let color = true;
  const ids: string[] = [];
  for (const arg of argv) {
    if (arg === '--help' || arg === '-h') return { command: 'help', topic: 'explain' };
    if (arg === '--no-color') color = false;
    else if (arg.startsWith('-')) throw new UsageError(`unknown option ${arg}`, 'explain');
    else ids.push(arg);
  }
  if (ids.length !== 1) throw new UsageError(ids.length === 0 ? 'name the rule to explain' : 'explain takes one rule id', 'explain');
  return { command: 'explain', rule: ids[0]!, color };
}

/** Help text of the program or of one command. */
export function helpText(topic: string | null): string {
  switch (topic) {
    case 'check':
      return [
        'Usage: noisewise check [options] [PATH...]',
        '',
        'Checks Python files (.py) and Jupyter notebooks (.ipynb). Folders are searched recursively, honouring',
        '.gitignore files and the exclude globs of [tool.noisewise] in pyproject.toml.',
        '',
        'Options:',
        '  --format FORMAT    text (default), json, sarif or github',
        '  --output FILE      write the report to FILE instead of standard output',
        '  --fix              apply the safe automatic fixes in place, then report what remains',
        '  --diff             print the safe fixes as unified diffs and write nothing (wins over --fix)',
        '  --fail-on LEVEL    exit with 1 when a finding is at or above LEVEL: error, warning (default) or info',
        '  --rule ID          run only this rule (repeatable, or comma-separated)',
        '  --skip ID          do not run this rule (repeatable, or comma-separated)',
        '  --exit-zero        exit with 0 even when there are findings (2 still means an error)',
        '  --jobs N           check with N worker threads (default: one per core, up to 8; 1 = no workers)',
        '  --no-color         plain text output (also when NO_COLOR is set or the output is not a terminal)',
        '  -h, --help         show this help',
        '',
        'Exit codes: 0 nothing at or above the fail level, 1 findings at or above it, 2 usage, configuration or internal error.',
        '',
      ].join('\n');
    case 'rules':
      return ['Usage: noisewise rules [--no-color]', '', 'Lists every rule: id, family, default severity, fix availability and title.', ''].join('\n');
    case 'explain':
      return ['Usage: noisewise explain RULE [--no-color]', '', 'Prints the page of one rule: what it catches, why it matters, examples and settings.', ''].join('\n');
    default: {
      const width = Math.max(...COMMANDS.map(([name]) => name.length));
      return [
        'Usage: noisewise <command> [options]',
        '',
        'Finds silent mistakes in the training and evaluation code of Bayesian and stochastic neural networks.',
        '',
        'Commands:',
        ...COMMANDS.map(([name, summary]) => `  ${name.padEnd(width)}  ${summary}`),
        '',
        'Options:',
        '  -h, --help     show this help (or `noisewise <command> --help`)',
        '  -V, --version  print the version',
        '',
      ].join('\n');
    }
  }
}
