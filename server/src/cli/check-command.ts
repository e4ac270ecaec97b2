// `noisewise check`: collects and reads the files, runs the engine (with the fix loop for --fix and --diff), writes
// fixed files safely, prints the report in the chosen format and decides the exit code.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { createTwoFilesPatch } from 'diff';
import { budgetFromEnv, DEFAULT_FILE_BUDGET_MS } from '../engine/budget';
import { loadConfigFor, toEngineSettings } from '../engine/config';
import { SEVERITY_RANK } from '../engine/finding';
import type { CheckInput, EngineSettings, FileReport, RuleSelection } from '../engine/types';
import type { CheckOptions, FailLevel } from './args';
import { type CliNote, collectFiles, compareStrings, digestOf, encodeSource, type SourceFile, writeFileAtomic } from './files';
import { runFixLoop } from './fix';
import { type CheckOutcome, type RuleEntry, slashPath } from './format/common';
import { formatGithub } from './format/github';
import { formatJson } from './format/json';
import { formatSarif } from './format/sarif';
import { formatText, formatTextNotes, useColor } from './format/text';
import { type CliIo, EXIT, UsageError } from './io';
import { VERSION } from './product';

/** The engine entry point, as the CLI calls it. */
export type CheckSources = (
  inputs: CheckInput[],
  options: { workspaceRoot: string; settingsFor(absPath: string): EngineSettings; rules?: RuleSelection; jobs?: number | null; budgetMs?: number },
) => Promise<FileReport[]>;

/** What `noisewise check` needs besides its options: the rule registry and the engine. */
export interface CheckDeps {
  rules: readonly RuleEntry[];
  checkSources: CheckSources;
}

/** The lowest engine severity rank that makes `--fail-on LEVEL` fail. */
export function failRank(level: FailLevel): number {
  return level === 'error' ? SEVERITY_RANK.error : level === 'warning' ? SEVERITY_RANK.warning : SEVERITY_RANK.information;
}

/** Checks that every `--rule`/`--skip` id names a rule; throws UsageError listing the ids otherwise. */
export function validateRuleIds(ids: readonly string[], options: { rules: readonly RuleEntry[]; option: string }): void {
  const { rules, option } = options;
  const known = new Set(rules.map((r) => r.meta.id));
  const unknown = ids.filter((id) => !known.has(id));
  if (unknown.length === 0) return;
  const list = [...known].sort(compareStrings).join(', ');
  throw new UsageError(`${option}: unknown rule ${unknown.map((u) => `"${u}"`).join(', ')}; the rules are: ${list}`, 'check');
}

/** A progress line on standard error, for long runs on a terminal only; erased when the run ends. */
class Progress {
  private shown = false;
  private timer: NodeJS.Timeout | null = null;
  private message = '';

  constructor(private readonly io: CliIo) {}

  /** Sets the message; it appears at once for large runs, or after a second otherwise. */
  update(message: string, large: boolean): void {
    if (!this.io.stderr.isTTY) return;
    this.message = message;
    if (this.shown || large) {
      this.draw();
      return;
    }
    if (!this.timer) {
      this.timer = setTimeout(() => this.draw(), 1000);
      this.timer.unref();
    }
  }

  private draw(): void {
    this.shown = true;
    this.io.stderr.write(`\r\u001b[K${this.message}`);
  }

  /** Erases the line. */
  done(): void {
    if (this.timer) clearTimeout(this.timer);
    this.timer = null;
    if (this.shown) this.io.stderr.write('\r\u001b[K');
    this.shown = false;
  }
}

/** Runs `noisewise check` and returns the exit code. Throws UsageError or ConfigError for exit code 2. */
export async function runCheck(options: CheckOptions, io: CliIo, deps: CheckDeps): Promise<number> {
  validateRuleIds(options.rules, { rules: deps.rules, option: '--rule' });
  validateRuleIds(options.skip, { rules: deps.rules, option: '--skip' });
  const knownRuleIds = deps.rules.map((r) => r.meta.id);
  const cwd = io.cwd;
  const progress = new Progress(io);

  const collected = collectFiles(options.paths, { cwd, knownRuleIds });
  // Load every configuration now, so a broken pyproject.toml stops the run before any analysis.
  for (const file of collected.files) loadConfigFor(file.absPath, knownRuleIds);
  const settingsFor = (absPath: string): EngineSettings => toEngineSettings(loadConfigFor(absPath, knownRuleIds));
  const selection: RuleSelection = {};
  if (options.rules.length > 0) selection.only = [...new Set(options.rules)];
  if (options.skip.length > 0) selection.skip = [...new Set(options.skip)];
  const large = collected.files.length >= 200;
  // The per-file analysis budget (NOISEWISE_FILE_BUDGET_MS overrides the engine's default, e.g. for tests).
  const budgetMs = budgetFromEnv(io.env, DEFAULT_FILE_BUDGET_MS);
  const check = (inputs: CheckInput[]): Promise<FileReport[]> => deps.checkSources(inputs, { workspaceRoot: cwd, settingsFor, rules: selection, jobs: options.jobs, budgetMs });

  const files = new Map(collected.files.map((f) => [f.path, f]));
  const inputs: CheckInput[] = collected.files.map((f) => ({ path: f.path, absPath: f.absPath, text: f.text }));
  const notes: CliNote[] = [...collected.notes];
  const fixMode: CheckOutcome['fixMode'] = options.diff ? 'diff' : options.fix ? 'fix' : 'none';
  let reports: FileReport[];
  let finalTexts = new Map(inputs.map((i) => [i.path, i.text]));
  let fixesApplied = 0;
  let filesFixed = 0;

  progress.update(`noisewise: checking ${collected.files.length} files…`, large);
  try {
    if (fixMode === 'none') {
      reports = await check(inputs);
    } else {
      const loop = await runFixLoop({
        files: collected.files.map((f) => ({
          input: { path: f.path, absPath: f.absPath, text: f.text },
          writable: f.writable,
          ...(f.readOnlyReason === undefined ? {} : { readOnlyReason: f.readOnlyReason }),
          style: { lineEnding: f.lineEnding },
        })),
        check,
        onRound: (round) => progress.update(`noisewise: fixing, round ${round}…`, large),
      });
      notes.push(...loop.notes);
      reports = loop.reports;
      fixesApplied = loop.fixesApplied;
      finalTexts = new Map(loop.inputs.map((i) => [i.path, i.text]));
      const changed = [...loop.changed].sort(compareStrings);
      filesFixed = changed.length;
      if (fixMode === 'diff') {
        progress.done();
        for (const filePath of changed) {
          const before = files.get(filePath)!.text;
          io.stdout.write(createTwoFilesPatch(`a/${filePath}`, `b/${filePath}`, before, finalTexts.get(filePath)!));
        }
      } else {
        const unwritten = writeFixedFiles(changed, files, finalTexts, notes);
        if (unwritten.length > 0) {
          // Report what is really on disk for the files that were left alone.
          for (const filePath of unwritten) {
            finalTexts.set(filePath, files.get(filePath)!.text);
            fixesApplied -= loop.fixesByFile.get(filePath) ?? 0;
          }
          filesFixed -= unwritten.length;
          reports = await check(loop.inputs.map((i) => ({ ...i, text: finalTexts.get(i.path)! })));
        }
      }
    }
  } finally {
    progress.done();
  }

  reports = [...reports].sort((a, b) => compareStrings(slashPath(a.path), slashPath(b.path)));
  for (const report of reports) {
    for (const note of report.notes) notes.push({ path: report.path, level: note.level, kind: note.kind, message: note.message });
  }
  notes.sort((a, b) => compareStrings(slashPath(a.path), slashPath(b.path)));
  const internal = reports.some((r) => r.notes.some((n) => n.kind === 'internal')) || notes.some((n) => n.level === 'error' && n.kind === 'write');
  const outcome: CheckOutcome = {
    reports,
    notes,
    rules: deps.rules,
    filesChecked: reports.filter((r) => !r.notes.some((n) => n.kind === 'skipped')).length,
    fixesApplied,
    filesFixed,
    fixMode,
    version: VERSION,
    cwd,
    sources: finalTexts,
    complete: !internal,
  };

  const toFile = options.output !== null;
  let text: string;
  switch (options.format) {
    case 'json':
      text = formatJson(outcome);
      break;
    case 'sarif':
      text = formatSarif(outcome);
      break;
    case 'github':
      text = formatGithub(outcome);
      break;
    default:
      text = formatText(outcome, { color: !toFile && useColor({ isTTY: io.stdout.isTTY, env: io.env, noColorFlag: !options.color }) });
  }
  if (options.output !== null) {
    const target = path.resolve(cwd, options.output);
    try {
      fs.writeFileSync(target, text);
    } catch (error) {
      throw new UsageError(`cannot write the report to ${options.output} (${(error as NodeJS.ErrnoException).code ?? (error as Error).message})`, 'check');
    }
  } else {
    io.stdout.write(text);
  }
  // The text format explains skipped and partly read files on standard error, after the report.
  if (options.format === 'text') io.stderr.write(formatTextNotes(notes));

  if (internal) return EXIT.error;
  if (options.exitZero) return EXIT.ok;
  const threshold = failRank(options.failOn);
  const failing = reports.some((r) => r.findings.some((f) => SEVERITY_RANK[f.severity] >= threshold));
  return failing ? EXIT.findings : EXIT.ok;
}

/**
 * Writes the fixed texts back, each only if the file on disk is still exactly what was read; returns the paths
 * that were not written (with a note each).
 */
function writeFixedFiles(changed: readonly string[], files: ReadonlyMap<string, SourceFile>, texts: ReadonlyMap<string, string>, notes: CliNote[]): string[] {
  const unwritten: string[] = [];
  for (const filePath of changed) {
    const file = files.get(filePath)!;
    const bytes = encodeSource(file, texts.get(filePath)!);
    if (bytes === null) {
      notes.push({ path: filePath, level: 'warning', kind: 'fix', message: `not written: the fixed text cannot be encoded as ${file.encoding}` });
      unwritten.push(filePath);
      continue;
    }
    if ((file.mode & 0o222) === 0) {
      // Nobody may write it: a read-only file is the user's decision, even for a process that could override it.
      notes.push({ path: filePath, level: 'warning', kind: 'fix', message: 'not written: the file is read-only' });
      unwritten.push(filePath);
      continue;
    }
    let current: Buffer;
    try {
      current = fs.readFileSync(file.absPath);
    } catch (error) {
      notes.push({ path: filePath, level: 'error', kind: 'write', message: `not written: cannot read it again (${(error as NodeJS.ErrnoException).code ?? 'error'})` });
      unwritten.push(filePath);
      continue;
    }
    if (digestOf(current) !== file.digest) {
      notes.push({ path: filePath, level: 'warning', kind: 'fix', message: 'not written: the file changed on disk while it was being checked; run again' });
      unwritten.push(filePath);
      continue;
    }
    try {
      writeFileAtomic(file.absPath, { bytes, mode: file.mode });
    } catch (error) {
      notes.push({ path: filePath, level: 'error', kind: 'write', message: `not written: ${(error as NodeJS.ErrnoException).code ?? (error as Error).message}` });
      unwritten.push(filePath);
    }
  }
  return unwritten;
}
