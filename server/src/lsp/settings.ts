// The editor settings (`noisewise.*`, read through workspace/configuration): their schema, which the VS Code
// extension's manifest must mirror (a drift test compares them), their validation, and how they are merged over
// `[tool.noisewise]` from the nearest pyproject.toml.
import * as path from 'node:path';
import picomatch from 'picomatch';
import { CONFIG_SEVERITY_WORDS, type ResolvedConfig } from '../engine/config';
import type { ConfiguredSeverity } from '../engine/finding';
import type { EngineSettings } from '../engine/types';

/** The `noisewise.*` settings of one scope (a workspace folder, or the editor as a whole). */
export interface EditorSettings {
  /** Severity per rule id; overrides the pyproject.toml entry for the same rule. */
  severity: Record<string, ConfiguredSeverity>;
  /** Globs relative to the workspace folder; files they match are not checked (in addition to pyproject's `exclude`). */
  exclude: string[];
  /** Extra names that mean "number of training examples" (added to pyproject's `dataset-size-names`). */
  datasetSizeNames: string[];
}

/** One editor setting as the manifest declares it. */
export interface EditorSettingSpec {
  /** Key under `noisewise.` in the editor. */
  key: keyof EditorSettings;
  /** The `[tool.noisewise]` key it mirrors. */
  pyprojectKey: string;
  type: 'object' | 'array';
  /** Manifest description (Markdown). */
  markdownDescription: string;
}

/** The editor settings the server reads, in manifest order. */
export const EDITOR_SETTINGS: readonly EditorSettingSpec[] = [
  {
    key: 'severity',
    pyprojectKey: 'severity',
    type: 'object',
    markdownDescription:
      'Severity per rule id: `off`, `hint`, `info`, `warning` or `error`. Mirrors `severity` in `[tool.noisewise]` of pyproject.toml; an entry here overrides the entry for the same rule there.',
  },
  {
    key: 'exclude',
    pyprojectKey: 'exclude',
    type: 'array',
    markdownDescription:
      'Globs, relative to the workspace folder, of files and folders that are not checked. Mirrors `exclude` in `[tool.noisewise]` of pyproject.toml; both lists apply.',
  },
  {
    key: 'datasetSizeNames',
    pyprojectKey: 'dataset-size-names',
    type: 'array',
    markdownDescription:
      'Extra Python names (or dotted names such as `cfg.n_train`) that mean "number of training examples". Mirrors `dataset-size-names` in `[tool.noisewise]` of pyproject.toml; both lists apply.',
  },
];

/** The settings used when the editor gives none. */
export function defaultEditorSettings(): EditorSettings {
  return { severity: {}, exclude: [], datasetSizeNames: [] };
}

const NAME_PATH = /^[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z_][A-Za-z0-9_]*)*$/;

/**
 * Reads the `noisewise` section sent by the editor. Invalid entries are dropped, each with a problem message for the
 * log, so a typo in the settings never stops the checks.
 */
export function parseEditorSettings(raw: unknown, knownRuleIds: readonly string[]): { settings: EditorSettings; problems: string[] } {
  const settings = defaultEditorSettings();
  const problems: string[] = [];
  if (raw === null || raw === undefined) return { settings, problems };
  if (typeof raw !== 'object' || Array.isArray(raw)) {
    problems.push('the "noisewise" settings are not an object; they are ignored');
    return { settings, problems };
  }
  const section = raw as Record<string, unknown>;
  const severity = section.severity;
  if (severity !== undefined && severity !== null) {
    if (typeof severity !== 'object' || Array.isArray(severity)) problems.push('"noisewise.severity" must be an object of rule id to severity; it is ignored');
    else {
      const ids = new Set(knownRuleIds);
      for (const [id, word] of Object.entries(severity as Record<string, unknown>)) {
        if (!ids.has(id)) problems.push(`"noisewise.severity": unknown rule id "${id}" is ignored`);
        else if (typeof word !== 'string' || !(CONFIG_SEVERITY_WORDS as readonly string[]).includes(word)) {
          problems.push(`"noisewise.severity.${id}": "${String(word)}" is not one of ${CONFIG_SEVERITY_WORDS.join(', ')}; it is ignored`);
        } else settings.severity[id] = word as ConfiguredSeverity;
      }
    }
  }
  settings.exclude = stringList(section.exclude, 'exclude', problems).filter((glob) => {
    try {
      picomatch.makeRe(glob, { dot: true });
      return glob.trim() !== '';
    } catch {
      problems.push(`"noisewise.exclude": "${glob}" is not a valid glob; it is ignored`);
      return false;
    }
  });
  settings.datasetSizeNames = stringList(section.datasetSizeNames, 'datasetSizeNames', problems).filter((name) => {
    if (NAME_PATH.test(name)) return true;
    problems.push(`"noisewise.datasetSizeNames": "${name}" is not a Python name or dotted name; it is ignored`);
    return false;
  });
  return { settings, problems };
}

function stringList(value: unknown, key: string, problems: string[]): string[] {
  if (value === undefined || value === null) return [];
  if (!Array.isArray(value)) {
    problems.push(`"noisewise.${key}" must be a list of strings; it is ignored`);
    return [];
  }
  return value.filter((item): item is string => {
    if (typeof item === 'string') return true;
    problems.push(`"noisewise.${key}" holds a value that is not a string; it is ignored`);
    return false;
  });
}

/**
 * The engine settings for a file: pyproject's `[tool.noisewise]` with the editor settings over it (a severity set in
 * the editor wins for its rule; name lists are joined).
 */
export function mergeSettings(project: Pick<ResolvedConfig, 'severity' | 'datasetSizeNames'> | null, editor: EditorSettings): EngineSettings {
  const severity: Record<string, ConfiguredSeverity> = {};
  for (const [id, word] of Object.entries({ ...(project?.severity ?? {}), ...editor.severity })) severity[id] = word === 'info' ? 'information' : word;
  const names = [...(project?.datasetSizeNames ?? []), ...editor.datasetSizeNames];
  return { severity, datasetSizeNames: [...new Set(names)] };
}

const matchers = new WeakMap<EditorSettings, (rel: string) => boolean>();

/** Whether the editor's `exclude` globs (relative to `folder`) match a file or one of its parent folders. */
export function isExcludedByEditor(editor: EditorSettings, folder: string, absPath: string): boolean {
  if (editor.exclude.length === 0) return false;
  const rel = path.relative(folder, absPath).split(path.sep).join('/');
  if (rel === '' || rel.startsWith('../') || path.isAbsolute(rel)) return false;
  let match = matchers.get(editor);
  if (!match) {
    match = picomatch(editor.exclude, { dot: true });
    matchers.set(editor, match);
  }
  const parts = rel.split('/');
  for (let i = 1; i <= parts.length; i++) if (match(parts.slice(0, i).join('/'))) return true;
  return false;
}

/** The `noisewise.trace.server` setting, which vscode-languageclient reads to trace the protocol. */
export const TRACE_SETTING = {
  type: 'string',
  enum: ['off', 'messages', 'verbose'],
  default: 'off',
  scope: 'window',
  markdownDescription: 'Traces the messages between the editor and the noisewise language server in the "noisewise" output channel (`messages` or `verbose`).',
} as const;

/**
 * The `contributes.configuration` block the VS Code extension's manifest must contain: every editor setting of
 * EDITOR_SETTINGS (severity with one property per rule id) and the trace setting. The drift test compares it with
 * client/package.json and can rewrite it there.
 */
export function manifestConfiguration(rules: readonly { meta: { id: string; title: string } }[]): Record<string, unknown> {
  const properties: Record<string, unknown> = {};
  for (const spec of EDITOR_SETTINGS) {
    const base = { scope: 'resource', markdownDescription: spec.markdownDescription };
    if (spec.key === 'severity') {
      const perRule: Record<string, unknown> = {};
      for (const rule of [...rules].sort((a, b) => (a.meta.id < b.meta.id ? -1 : 1))) {
        perRule[rule.meta.id] = { type: 'string', enum: [...CONFIG_SEVERITY_WORDS], markdownDescription: `${rule.meta.title}.` };
      }
      properties[`noisewise.${spec.key}`] = { type: 'object', default: {}, properties: perRule, additionalProperties: false, ...base };
    } else {
      properties[`noisewise.${spec.key}`] = { type: 'array', items: { type: 'string' }, default: [], ...base };
    }
  }
  properties['noisewise.trace.server'] = { ...TRACE_SETTING, enum: [...TRACE_SETTING.enum] };
  return { title: 'noisewise', properties };
}
