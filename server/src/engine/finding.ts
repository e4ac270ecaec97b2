// Findings and fixes as the engine produces them: offsets into the analysed text, independent of any output format.

/** Severity words; the CLI prints `information` as `info`. `off` disables a rule. */
export type Severity = 'error' | 'warning' | 'information' | 'hint';

/** Severity as configured (`info` is accepted for `information`). */
export type ConfiguredSeverity = Severity | 'info' | 'off';

/** Numeric rank for comparisons: a higher number is more severe. */
export const SEVERITY_RANK: Record<Severity, number> = { hint: 1, information: 2, warning: 3, error: 4 };

/** One replacement in a file, in UTF-16 offsets of that file's analysed text (the virtual module for notebooks). */
export interface TextEdit {
  /** Workspace-relative or absolute path of the file the edit applies to (the finding's file when omitted). */
  path?: string;
  start: number;
  end: number;
  newText: string;
}

/**
 * How much a fix may be trusted: `safe` fixes keep the program's intended meaning and are applied by `--fix` and
 * "fix all"; `review` fixes change training behaviour and are only offered as labelled quick fixes.
 */
export type FixSafety = 'safe' | 'review';

/** A rewrite offered for a finding; all its edits are applied together (one workspace edit). */
export interface Fix {
  title: string;
  safety: FixSafety;
  edits: TextEdit[];
}

/** A number computed for this code that explains the finding (shown in hovers and in JSON/SARIF properties). */
export interface Figure {
  label: string;
  value: number | string;
  /** Where the number comes from (paper, library or formula), for the hover's footnote. */
  source?: string;
}

/** The other half of a finding (e.g. the KL term for a data term), in the same or another file. */
export interface RelatedLocation {
  path?: string;
  start: number;
  end: number;
  message: string;
}

/** One finding of one rule in one file. */
export interface Finding {
  rule: string;
  severity: Severity;
  /** Path of the file, as given to the engine (absolute or workspace-relative). */
  path: string;
  start: number;
  end: number;
  message: string;
  messageId: string;
  figures: Figure[];
  fixes: Fix[];
  related: RelatedLocation[];
}
