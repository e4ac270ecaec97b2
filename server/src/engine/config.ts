// Reads `[tool.noisewise]` from the nearest pyproject.toml, validates it strictly and turns it into engine settings.
import * as fs from 'node:fs';
import * as path from 'node:path';
import picomatch from 'picomatch';
import { parse as parseToml, TomlError } from 'smol-toml';
import type { ConfiguredSeverity } from './finding';
import type { EngineSettings } from './types';

/** A configuration file that cannot be used; the message names the file and the key. The CLI exits with code 2. */
export class ConfigError extends Error {
  override name = 'ConfigError';
}

/** The `[tool.noisewise]` table of one pyproject.toml, validated (every field present, defaults filled in). */
export interface ParsedConfig {
  /** Whether the file has a `[tool.noisewise]` table at all. */
  hasTable: boolean;
  /** Severity per rule id, as written (`info` stays `info`). */
  severity: Record<string, ConfiguredSeverity>;
  /** Globs relative to the pyproject's folder. */
  exclude: string[];
  /** Extra names that mean "number of training examples". */
  datasetSizeNames: string[];
}

/** The configuration that applies to one file. */
export interface ResolvedConfig {
  /** Absolute path of the pyproject.toml used, or null when there is none up to the filesystem root. */
  file: string | null;
  /** Folder of that pyproject.toml, or the folder the search started from; exclude globs are relative to it. */
  root: string;
  severity: Record<string, ConfiguredSeverity>;
  exclude: string[];
  datasetSizeNames: string[];
}

/** The severity words accepted in configuration. */
export const CONFIG_SEVERITY_WORDS: readonly ConfiguredSeverity[] = ['off', 'hint', 'info', 'warning', 'error'];

/** The keys of `[tool.noisewise]`. */
export const CONFIG_KEYS = ['severity', 'exclude', 'dataset-size-names'] as const;

const IDENTIFIER_PATH = /^[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z_][A-Za-z0-9_]*)*$/;

/**
 * Parses the text of a pyproject.toml and validates its `[tool.noisewise]` table. `fileLabel` names the file in
 * error messages; `knownRuleIds` are the ids a `severity` entry may name. Throws ConfigError on any problem.
 */
export function parseConfigText(text: string, fileLabel: string, knownRuleIds: readonly string[]): ParsedConfig {
  let doc: Record<string, unknown>;
  try {
    doc = parseToml(text) as Record<string, unknown>;
  } catch (error) {
    if (error instanceof TomlError) {
      const firstLine = error.message.split('\n')[0]!.replace(/^Invalid TOML document: /, '');
      throw new ConfigError(`${fileLabel}:${error.line}:${error.column}: not valid TOML: ${firstLine}`);
    }
    throw new ConfigError(`${fileLabel}: not valid TOML: ${(error as Error).message}`);
  }
  const empty: ParsedConfig = { hasTable: false, severity: {}, exclude: [], datasetSizeNames: [] };
  const tool = doc.tool;
  if (tool === undefined) return empty;
  if (!isTable(tool)) throw new ConfigError(`${fileLabel}: "tool" must be a table`);
  const table = tool.noisewise;
  if (table === undefined) return empty;
  if (!isTable(table)) throw new ConfigError(`${fileLabel}: [tool.noisewise] must be a table`);

  const known = new Set<string>(CONFIG_KEYS);
  for (const key of Object.keys(table)) {
    if (!known.has(key)) {
      const hint = suggest(key, CONFIG_KEYS);
      throw new ConfigError(
        `${fileLabel}: unknown key "tool.noisewise.${key}"${hint ? ` (did you mean "${hint}"?)` : ''}; the keys are ${CONFIG_KEYS.join(', ')}`,
      );
    }
  }
  return {
    hasTable: true,
    severity: readSeverity(table.severity, fileLabel, knownRuleIds),
    exclude: readExclude(table.exclude, fileLabel),
    datasetSizeNames: readDatasetSizeNames(table['dataset-size-names'], fileLabel),
  };
}

function readSeverity(value: unknown, fileLabel: string, knownRuleIds: readonly string[]): Record<string, ConfiguredSeverity> {
  if (value === undefined) return {};
  if (!isTable(value)) {
    throw new ConfigError(`${fileLabel}: "tool.noisewise.severity" must be a table of rule id = severity, e.g. severity = { some-rule = "error" }`);
  }
  const ids = new Set(knownRuleIds);
  const out: Record<string, ConfiguredSeverity> = {};
  for (const [ruleId, word] of Object.entries(value)) {
    const key = `tool.noisewise.severity.${ruleId}`;
    if (!ids.has(ruleId)) {
      const hint = suggest(ruleId, knownRuleIds);
      throw new ConfigError(
        `${fileLabel}: "${key}": unknown rule id "${ruleId}"${hint ? ` (did you mean "${hint}"?)` : ''}; run \`noisewise rules\` for the list`,
      );
    }
    if (typeof word !== 'string') {
      throw new ConfigError(`${fileLabel}: "${key}" must be a string, one of ${quoteList(CONFIG_SEVERITY_WORDS)}`);
    }
    if (!(CONFIG_SEVERITY_WORDS as readonly string[]).includes(word)) {
      const hint = word === 'information' ? ' (write "info")' : '';
      throw new ConfigError(`${fileLabel}: "${key}": unknown severity "${word}"${hint}; use one of ${quoteList(CONFIG_SEVERITY_WORDS)}`);
    }
    out[ruleId] = word as ConfiguredSeverity;
  }
  return out;
}

function readExclude(value: unknown, fileLabel: string): string[] {
  const globs = readStringList(value, fileLabel, 'exclude', 'a list of glob strings, e.g. exclude = ["legacy/**"]');
  globs.forEach((glob, i) => {
    if (glob.trim() === '') throw new ConfigError(`${fileLabel}: "tool.noisewise.exclude[${i}]" is empty`);
    if (path.isAbsolute(glob)) {
      throw new ConfigError(`${fileLabel}: "tool.noisewise.exclude[${i}]" ("${glob}") must be relative to the folder of pyproject.toml`);
    }
    try {
      picomatch.makeRe(glob, { dot: true });
    } catch (error) {
      throw new ConfigError(`${fileLabel}: "tool.noisewise.exclude[${i}]" ("${glob}") is not a valid glob: ${(error as Error).message}`);
    }
  });
  return globs;
}

function readDatasetSizeNames(value: unknown, fileLabel: string): string[] {
  const names = readStringList(value, fileLabel, 'dataset-size-names', 'a list of Python names, e.g. dataset-size-names = ["n_train"]');
  names.forEach((name, i) => {
    if (!IDENTIFIER_PATH.test(name)) {
      throw new ConfigError(
        `${fileLabel}: "tool.noisewise.dataset-size-names[${i}]" ("${name}") is not a Python name or dotted name such as n_train or cfg.n_train`,
      );
    }
  });
  return names;
}

function readStringList(value: unknown, fileLabel: string, key: string, expected: string): string[] {
  if (value === undefined) return [];
  if (!Array.isArray(value)) throw new ConfigError(`${fileLabel}: "tool.noisewise.${key}" must be ${expected}`);
  value.forEach((item, i) => {
    if (typeof item !== 'string') throw new ConfigError(`${fileLabel}: "tool.noisewise.${key}[${i}]" must be a string`);
  });
  return value as string[];
}

function isTable(value: unknown): value is Record<string, unknown> {
  return typeof value === 'object' && value !== null && !Array.isArray(value) && !(value instanceof Date);
}

function quoteList(words: readonly string[]): string {
  return words.map((w) => `"${w}"`).join(', ');
}

/** The closest candidate within a small edit distance, for "did you mean" hints. */
function suggest(word: string, candidates: readonly string[]): string | undefined {
  let best: string | undefined;
  let bestDistance = Math.max(2, Math.floor(word.length / 3)) + 1;
  for (const candidate of candidates) {
    const d = editDistance(word, candidate);
    if (d < bestDistance) {
      best = candidate;
      bestDistance = d;
    }
  }
  return best;
}

function editDistance(a: string, b: string): number {
  let previous = Array.from({ length: b.length + 1 }, (_, j) => j);
  for (let i = 1; i <= a.length; i++) {
    const current = [i];
    for (let j = 1; j <= b.length; j++) {
      current[j] = Math.min(previous[j]! + 1, current[j - 1]! + 1, previous[j - 1]! + (a[i - 1] === b[j - 1] ? 0 : 1));
    }
    previous = current;
  }
  return previous[b.length]!;
}

/** Resolved configuration per folder; the key also holds the rule ids the validation used. */
const cache = new Map<string, ResolvedConfig>();

/** Forgets every cached configuration (after a pyproject.toml changed). */
export function clearConfigCache(): void {
  cache.clear();
}

/**
 * The configuration for a file: the `[tool.noisewise]` table of the nearest pyproject.toml found walking up from the
 * file's folder to the filesystem root (an empty configuration when there is none). Cached per folder.
 */
export function loadConfigFor(absFilePath: string, knownRuleIds: readonly string[]): ResolvedConfig {
  return loadConfigForDir(path.dirname(path.resolve(absFilePath)), knownRuleIds);
}

/** The configuration that applies inside a folder (see loadConfigFor). */
export function loadConfigForDir(absDir: string, knownRuleIds: readonly string[]): ResolvedConfig {
  const start = path.resolve(absDir);
  const idsKey = knownRuleIds.join(',');
  const visited: string[] = [];
  let dir = start;
  let found: ResolvedConfig | undefined;
  for (;;) {
    const cached = cache.get(`${dir}\0${idsKey}`);
    if (cached) {
      found = cached;
      break;
    }
    visited.push(dir);
    const candidate = path.join(dir, 'pyproject.toml');
    if (isFile(candidate)) {
      found = readConfigFile(candidate, knownRuleIds);
      break;
    }
    const parent = path.dirname(dir);
    if (parent === dir) break;
    dir = parent;
  }
  if (!found || found.file === null) {
    // No pyproject.toml anywhere above: each folder on the way is its own root with an empty configuration.
    for (const d of visited) cache.set(`${d}\0${idsKey}`, { file: null, root: d, severity: {}, exclude: [], datasetSizeNames: [] });
    return cache.get(`${start}\0${idsKey}`)!;
  }
  for (const d of visited) cache.set(`${d}\0${idsKey}`, found);
  return found;
}

function isFile(p: string): boolean {
  try {
    return fs.statSync(p).isFile();
  } catch {
    return false;
  }
}

function readConfigFile(file: string, knownRuleIds: readonly string[]): ResolvedConfig {
  let text: string;
  try {
    text = fs.readFileSync(file, 'utf8');
  } catch (error) {
    throw new ConfigError(`${file}: cannot read the file (${(error as NodeJS.ErrnoException).code ?? (error as Error).message})`);
  }
  const parsed = parseConfigText(text.charCodeAt(0) === 0xfeff ? text.slice(1) : text, file, knownRuleIds);
  return {
    file,
    root: path.dirname(file),
    severity: parsed.severity,
    exclude: parsed.exclude,
    datasetSizeNames: parsed.datasetSizeNames,
  };
}

/** Turns a resolved configuration into the settings the engine reads (`info` becomes `information`). */
export function toEngineSettings(config: Pick<ResolvedConfig, 'severity' | 'datasetSizeNames'>): EngineSettings {
  const severity: Record<string, ConfiguredSeverity> = {};
  for (const [ruleId, word] of Object.entries(config.severity)) severity[ruleId] = word === 'info' ? 'information' : word;
  return { severity, datasetSizeNames: [...config.datasetSizeNames] };
}

const matchers = new WeakMap<ResolvedConfig, (relPath: string) => boolean>();

/**
 * Whether a file or folder is excluded by the configuration's globs. The path is made relative to the config's root
 * (forward slashes); a path is also excluded when one of its parent folders (below the root) matches.
 */
export function isExcluded(config: ResolvedConfig, absPath: string): boolean {
  if (config.exclude.length === 0) return false;
  const rel = path.relative(config.root, path.resolve(absPath)).split(path.sep).join('/');
  if (rel === '' || rel.startsWith('../') || rel === '..' || path.isAbsolute(rel)) return false;
  let match = matchers.get(config);
  if (!match) {
    match = picomatch(config.exclude, { dot: true });
    matchers.set(config, match);
  }
  const parts = rel.split('/');
  for (let i = 1; i <= parts.length; i++) {
    if (match(parts.slice(0, i).join('/'))) return true;
  }
  return false;
}
