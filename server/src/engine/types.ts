// The contract between the engine and its two front ends (the CLI and the language server): what goes in, what comes out.
import type { NotebookModel } from '../parse/notebook';
import type { ConfiguredSeverity, Finding } from './finding';

/** One file handed to the engine, already read and decoded by a front end (the engine does no IO). */
export interface CheckInput {
  /** Path as it should appear in output (relative to the working directory for the CLI). */
  path: string;
  /** Absolute path, used for module resolution across the workspace and for configuration lookup. */
  absPath: string;
  /** Decoded text of the file (notebook JSON for .ipynb). */
  text: string;
}

/** Something the engine has to say about a whole file rather than a place in it. */
export interface FileNote {
  level: 'error' | 'warning' | 'info';
  /**
   * `skipped`: not analysed (broken notebook, binary …); `syntax`: parse errors, analysis went on; `internal`: a rule
   * (or the analysis itself) failed; `budget`: the analysis ran out of time and its findings are partial.
   */
  kind: 'skipped' | 'syntax' | 'internal' | 'budget';
  message: string;
}

/** The engine's verdict on one file. */
export interface FileReport {
  path: string;
  absPath: string;
  kind: 'python' | 'notebook';
  /** The analysed text: the file itself, or the notebook's virtual module. All offsets refer to it. */
  text: string;
  notebook: NotebookModel | null;
  /** Findings after suppression and configured severities, sorted by position then rule. */
  findings: Finding[];
  notes: FileNote[];
}

/** Settings that apply to one file (from the nearest pyproject.toml, merged with editor settings). */
export interface EngineSettings {
  severity: Record<string, ConfiguredSeverity>;
  /** Extra names that mean "number of training examples". */
  datasetSizeNames: string[];
}

/** Which rules run: all enabled ones, restricted by `only` and minus `skip` (rule ids). */
export interface RuleSelection {
  only?: string[];
  skip?: string[];
}
