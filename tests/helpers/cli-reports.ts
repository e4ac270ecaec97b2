// Builds file reports and check outcomes by hand, for testing the output formats without running the engine.
import type { Figure, Finding, Fix, RelatedLocation, Severity } from '../../server/src/engine/finding';
import type { RuleMeta } from '../../server/src/engine/rule-meta';
import type { FileReport } from '../../server/src/engine/types';
import type { CheckOutcome, RuleEntry } from '../../server/src/cli/format/common';
import { readNotebook } from '../../server/src/parse/notebook';

/** Two rules with pages, enough to exercise rule tables and indexes. */
export const TEST_RULES: RuleEntry[] = [
  {
    meta: meta('trainable-scale-raw', 'variational', 'warning', 'always', 'A trainable scale used without a positivity transform'),
    doc: '# trainable-scale-raw\n\n## What it catches\n\nA raw scale.\n',
  },
  {
    meta: meta('frozen-dropout-samples', 'mc-dropout', 'information', 'none', 'MC samples drawn with dropout switched off'),
    doc: '# frozen-dropout-samples\n\n## What it catches\n\nIdentical samples.\n',
  },
];

function meta(id: string, family: RuleMeta['family'], defaultSeverity: Severity, fix: RuleMeta['fix'], title: string): RuleMeta {
  return { id, title, family, defaultSeverity, status: { stage: 'experimental', since: '0.1.0' }, fix, messages: { main: title }, settings: [] };
}

/** Options of a hand-made finding; the range is given by the text it covers (first occurrence at or after `from`). */
export interface FindingSpec {
  rule?: string;
  severity?: Severity;
  covers: string;
  from?: number;
  message?: string;
  figures?: Figure[];
  fixes?: Fix[];
  related?: RelatedLocation[];
}

/** A finding over the first occurrence of `spec.covers` in `text`. */
export function findingIn(text: string, filePath: string, spec: FindingSpec): Finding {
  const start = text.indexOf(spec.covers, spec.from ?? 0);
  if (start < 0) throw new Error(`"${spec.covers}" is not in the text`);
  return {
    rule: spec.rule ?? 'trainable-scale-raw',
    severity: spec.severity ?? 'warning',
    path: filePath,
    start,
    end: start + spec.covers.length,
    message: spec.message ?? 'The scale is trainable and unconstrained.',
    messageId: 'main',
    figures: spec.figures ?? [],
    fixes: spec.fixes ?? [],
    related: spec.related ?? [],
  };
}

/** A Python file report. */
export function pythonReport(filePath: string, text: string, specs: FindingSpec[] = []): FileReport {
  return {
    path: filePath,
    absPath: `/srv/gauge-lab/${filePath}`,
    kind: 'python',
    text,
    notebook: null,
    findings: specs.map((s) => findingIn(text, filePath, s)),
    notes: [],
  };
}

/** A notebook report from the notebook's JSON text; finding ranges are found in the virtual module. */
export function notebookReport(filePath: string, raw: string, specs: FindingSpec[] = []): FileReport {
  const model = readNotebook(raw);
  return {
    path: filePath,
    absPath: `/srv/gauge-lab/${filePath}`,
    kind: 'notebook',
    text: model.text,
    notebook: model,
    findings: specs.map((s) => findingIn(model.text, filePath, s)),
    notes: [],
  };
}

/** A notebook file as nbformat writes it (one-space indent, list sources, final newline). */
export function notebookJson(cells: { type: 'code' | 'markdown'; source: string }[]): string {
  const doc = {
    cells: cells.map((c) =>
      c.type === 'code'
        ? { cell_type: 'code', execution_count: null, metadata: {}, outputs: [], source: c.source.split(/(?<=\n)/) }
        : { cell_type: 'markdown', metadata: {}, source: c.source.split(/(?<=\n)/) },
    ),
    metadata: { kernelspec: { display_name: 'Python 3', language: 'python', name: 'python3' } },
    nbformat: 4,
    nbformat_minor: 5,
  };
  return `${JSON.stringify(doc, null, 1)}\n`;
}

/** A check outcome around some reports, with sensible defaults. */
export function outcomeOf(reports: FileReport[], extra: Partial<CheckOutcome> = {}): CheckOutcome {
  const sources = new Map<string, string>();
  for (const r of reports) {
    sources.set(r.path, r.kind === 'notebook' ? `${JSON.stringify(r.notebook!.json, null, r.notebook!.indent)}${r.notebook!.trailingNewline ? '\n' : ''}` : r.text);
  }
  return {
    reports,
    notes: [],
    rules: TEST_RULES,
    filesChecked: reports.length,
    fixesApplied: 0,
    filesFixed: 0,
    fixMode: 'none',
    version: '0.1.0',
    cwd: '/srv/gauge-lab',
    sources,
    complete: true,
    ...extra,
  };
}
