// The SARIF 2.1.0 log for code-scanning dashboards: one run, the rule table, results with regions, related
// locations, figures and fixes, and the notes as tool execution notifications.
import { pathToFileURL } from 'node:url';
import type { Finding, Severity, TextEdit } from '../../engine/finding';
import type { FileReport } from '../../engine/types';
import { cliRange } from '../../parse/locations';
import { codePointsBetween } from '../../parse/positions';
import type { CliNote } from '../files';
import { rewriteFile } from '../fix';
import { INFORMATION_URI, PRODUCT_NAME, ruleHelpUri } from '../product';
import { type CheckOutcome, isFixable, placedFindings, reportByPath, slashPath } from './common';

/** The schema URI written into `$schema`. */
export const SARIF_SCHEMA_URI = 'https://json.schemastore.org/sarif-2.1.0.json';
/** The base id that relative artifact URIs refer to; resolved through `originalUriBaseIds`. */
export const SRCROOT = '%SRCROOT%';

type SarifLevel = 'error' | 'warning' | 'note';
type Json = Record<string, unknown>;

/** The SARIF level of a severity (information and hint are both `note`). */
export function sarifLevel(severity: Severity): SarifLevel {
  if (severity === 'error') return 'error';
  if (severity === 'warning') return 'warning';
  return 'note';
}

function noteLevel(level: CliNote['level']): SarifLevel {
  return level === 'info' ? 'note' : level;
}

/** A relative path as a URI reference (each segment percent-encoded). */
export function relativeUri(p: string): string {
  return slashPath(p)
    .split('/')
    .map((segment) => (segment === '..' || segment === '.' ? segment : encodeURIComponent(segment)))
    .join('/');
}

function artifactLocation(p: string): Json {
  return { uri: relativeUri(p), uriBaseId: SRCROOT };
}

/** Region of offsets in a report: lines and code-point columns (inside the cell for notebooks). */
function region(report: FileReport, start: number, end: number): { region: Json; cell?: number } {
  const r = cliRange(report, start, end);
  const out: Json = { startLine: r.line, startColumn: r.column, endLine: r.endLine, endColumn: r.endColumn };
  return r.cell === undefined ? { region: out } : { region: out, cell: r.cell };
}

function location(report: FileReport, start: number, end: number): Json {
  const { region: reg, cell } = region(report, start, end);
  const out: Json = { physicalLocation: { artifactLocation: artifactLocation(report.path), region: reg } };
  if (cell !== undefined) out.properties = { cell };
  return out;
}

/** The one replacement that turns `before` into `after`, in code points (common prefix and suffix left out). */
function wholeTextReplacement(before: string, after: string): Json {
  let prefix = 0;
  const limit = Math.min(before.length, after.length);
  while (prefix < limit && before.charCodeAt(prefix) === after.charCodeAt(prefix)) prefix++;
  if (prefix > 0 && isHigh(before.charCodeAt(prefix - 1))) prefix--;
  let suffix = 0;
  while (suffix < limit - prefix && before.charCodeAt(before.length - 1 - suffix) === after.charCodeAt(after.length - 1 - suffix)) suffix++;
  if (suffix > 0 && isLow(before.charCodeAt(before.length - suffix))) suffix--;
  return {
    deletedRegion: {
      charOffset: codePointsBetween(before, 0, prefix),
      charLength: codePointsBetween(before, prefix, before.length - suffix),
    },
    insertedContent: { text: after.slice(prefix, after.length - suffix) },
  };
}

function isHigh(c: number): boolean {
  return c >= 0xd800 && c <= 0xdbff;
}

function isLow(c: number): boolean {
  return c >= 0xdc00 && c <= 0xdfff;
}

/**
 * A finding's fixes as SARIF fix objects. Python edits become line/column replacements; a notebook's edits are
 * applied to its cells and expressed as one character-offset replacement in the .ipynb file. A fix that cannot be
 * expressed (its other file was not checked, or it does not apply) is left out.
 */
function sarifFixes(outcome: CheckOutcome, report: FileReport, finding: Finding): Json[] {
  const out: Json[] = [];
  for (const fix of finding.fixes) {
    const byFile = new Map<FileReport, TextEdit[]>();
    let expressible = true;
    for (const edit of fix.edits) {
      const target = edit.path === undefined || slashPath(edit.path) === slashPath(report.path) ? report : reportByPath(outcome, edit.path);
      if (!target) {
        expressible = false;
        break;
      }
      const list = byFile.get(target) ?? [];
      list.push(edit);
      byFile.set(target, list);
    }
    if (!expressible || byFile.size === 0) continue;
    const changes: Json[] = [];
    for (const [target, edits] of byFile) {
      if (target.kind === 'notebook') {
        const before = outcome.sources.get(target.path);
        if (before === undefined) {
          expressible = false;
          break;
        }
        let after: string;
        try {
          after = rewriteFile(target, edits, { lineEnding: /\r\n/.test(before) ? '\r\n' : '\n' });
        } catch {
          expressible = false;
          break;
        }
        changes.push({ artifactLocation: artifactLocation(target.path), replacements: [wholeTextReplacement(before, after)] });
      } else {
        const replacements = [...edits]
          .sort((a, b) => a.start - b.start)
          .map((edit) => ({ deletedRegion: region(target, edit.start, edit.end).region, insertedContent: { text: edit.newText } }));
        changes.push({ artifactLocation: artifactLocation(target.path), replacements });
      }
    }
    if (!expressible) continue;
    out.push({ description: { text: fix.title }, artifactChanges: changes, properties: { safety: fix.safety } });
  }
  return out;
}

/** A rule's friendly name for SARIF viewers: its id in PascalCase (`unconstrained-std` → `UnconstrainedStd`). */
export function friendlyName(ruleId: string): string {
  return ruleId
    .split(/[^A-Za-z0-9]+/)
    .filter(Boolean)
    .map((part) => part[0]!.toUpperCase() + part.slice(1))
    .join('');
}

/** Builds the SARIF log object of a check run. */
export function sarifLog(outcome: CheckOutcome): Json {
  const ruleIndex = new Map<string, number>();
  const rules = outcome.rules.map(({ meta, doc }, i) => {
    ruleIndex.set(meta.id, i);
    return {
      id: meta.id,
      name: friendlyName(meta.id),
      shortDescription: { text: meta.title },
      helpUri: ruleHelpUri(meta.id),
      help: { text: `${meta.title} (${ruleHelpUri(meta.id)})`, markdown: doc },
      defaultConfiguration: { level: sarifLevel(meta.defaultSeverity), enabled: true },
      properties: { family: meta.family, fix: meta.fix, status: meta.status.stage, tags: [meta.family] },
    };
  });
  const results: Json[] = [];
  for (const { report, finding } of placedFindings(outcome)) {
    const { region: reg, cell } = region(report, finding.start, finding.end);
    const result: Json = {
      ruleId: finding.rule,
      level: sarifLevel(finding.severity),
      message: { text: finding.message },
      locations: [{ physicalLocation: { artifactLocation: artifactLocation(report.path), region: reg } }],
    };
    const index = ruleIndex.get(finding.rule);
    if (index !== undefined) result.ruleIndex = index;
    const related: Json[] = [];
    for (const rel of finding.related) {
      const target = rel.path === undefined ? report : reportByPath(outcome, rel.path);
      if (!target) continue;
      related.push({ id: related.length + 1, message: { text: rel.message }, ...location(target, rel.start, rel.end) });
    }
    if (related.length > 0) result.relatedLocations = related;
    const fixes = sarifFixes(outcome, report, finding);
    if (fixes.length > 0) result.fixes = fixes;
    const properties: Json = {
      figures: finding.figures.map((f) => (f.source === undefined ? { label: f.label, value: f.value } : { ...f })),
      fixable: isFixable(finding),
    };
    if (cell !== undefined) properties.cell = cell;
    result.properties = properties;
    results.push(result);
  }
  const notifications = outcome.notes.map((note) => ({
    level: noteLevel(note.level),
    message: { text: note.kind === 'skipped' ? `${note.path}: skipped: ${note.message}` : `${note.path}: ${note.message}` },
    locations: [{ physicalLocation: { artifactLocation: artifactLocation(note.path) } }],
    properties: { kind: note.kind },
  }));
  const cwdUri = pathToFileURL(outcome.cwd.endsWith('/') ? outcome.cwd : `${outcome.cwd}/`).href;
  return {
    $schema: SARIF_SCHEMA_URI,
    version: '2.1.0',
    runs: [
      {
        tool: {
          driver: {
            name: PRODUCT_NAME,
            version: outcome.version,
            semanticVersion: outcome.version,
            informationUri: INFORMATION_URI,
            rules,
          },
        },
        invocations: [{ executionSuccessful: outcome.complete, toolExecutionNotifications: notifications }],
        originalUriBaseIds: { [SRCROOT]: { uri: cwdUri } },
        columnKind: 'unicodeCodePoints',
        results,
      },
    ],
  };
}

/** The SARIF log as text (two-space indent, final newline). */
export function formatSarif(outcome: CheckOutcome): string {
  return `${JSON.stringify(sarifLog(outcome), null, 2)}\n`;
}
