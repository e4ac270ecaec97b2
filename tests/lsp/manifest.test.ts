// Drift tests for the VS Code extension's manifest (client/package.json): its settings must be exactly what the
// server reads (schema, rule ids, descriptions), its commands must be registered by the extension, and its engines must
// match the client library. `NOISEWISE_UPDATE_MANIFEST=1` rewrites the settings block from the server's schema.
import * as fs from 'node:fs';
import * as path from 'node:path';
import Ajv from 'ajv';
import { describe, expect, it } from 'vitest';
import { allRules } from '../../rules/index';
import { CONFIG_KEYS } from '../../server/src/engine/config';
import { EDITOR_SETTINGS, manifestConfiguration, parseEditorSettings } from '../../server/src/lsp/settings';

const REPO = path.resolve(__dirname, '..', '..');
const manifestPath = path.join(REPO, 'client', 'package.json');
const update = process.env.NOISEWISE_UPDATE_MANIFEST === '1';

function manifest(): Record<string, any> {
  return JSON.parse(fs.readFileSync(manifestPath, 'utf8'));
}

describe('client/package.json', () => {
  it('contributes exactly the settings the server reads (run with NOISEWISE_UPDATE_MANIFEST=1 to rewrite)', () => {
    const expected = manifestConfiguration(allRules);
    if (update) {
      const m = manifest();
      m.contributes.configuration = expected;
      fs.writeFileSync(manifestPath, JSON.stringify(m, null, 2) + '\n');
    }
    expect(manifest().contributes.configuration).toEqual(expected);
  });

  it('has one severity entry per registered rule id and nothing else', () => {
    const severity = manifest().contributes.configuration.properties['noisewise.severity'];
    expect(Object.keys(severity.properties).sort()).toEqual(allRules.map((r) => r.meta.id).sort());
    expect(severity.additionalProperties).toBe(false);
  });

  it('mirrors every [tool.noisewise] key of pyproject.toml and no other', () => {
    expect(EDITOR_SETTINGS.map((s) => s.pyprojectKey).sort()).toEqual([...CONFIG_KEYS].sort());
    const keys = Object.keys(manifest().contributes.configuration.properties).sort();
    expect(keys).toEqual([...EDITOR_SETTINGS.map((s) => `noisewise.${s.key}`), 'noisewise.trace.server'].sort());
  });

  it('accepts in the server exactly the values its schema accepts', () => {
    const properties = manifest().contributes.configuration.properties;
    const schema = {
      type: 'object',
      properties: Object.fromEntries(Object.entries(properties).filter(([k]) => k !== 'noisewise.trace.server').map(([k, v]) => [k.slice('noisewise.'.length), v])),
    };
    const ajv = new Ajv({ strict: false });
    const validate = ajv.compile(schema);
    const ruleId = allRules[0]!.meta.id;
    const samples: Record<string, unknown>[] = [
      { severity: { [ruleId]: 'off' }, exclude: ['legacy/**'], datasetSizeNames: ['n_gauge_records', 'cfg.n_train'] },
      { severity: { [ruleId]: 'information' } },
      { severity: { 'no-such-rule': 'error' } },
      { exclude: [3] },
      { datasetSizeNames: 'n_train' },
      {},
    ];
    for (const sample of samples) {
      const serverProblems = parseEditorSettings(sample, allRules.map((r) => r.meta.id)).problems;
      expect(serverProblems.length === 0, `${JSON.stringify(sample)}: server problems ${JSON.stringify(serverProblems)}`).toBe(validate(sample) === true);
    }
  });

  it('registers every contributed command in the extension and activates on Python files and notebooks', () => {
    const m = manifest();
    const source = fs.readFileSync(path.join(REPO, 'client', 'src', 'extension.ts'), 'utf8');
    for (const command of m.contributes.commands) expect(source).toContain(`registerCommand('${command.command}'`);
    expect(m.activationEvents).toEqual(expect.arrayContaining(['onLanguage:python', 'onNotebook:jupyter-notebook']));
    expect(m.main).toBe('./dist/extension.js');
  });

  it('declares workspace trust and virtual workspaces honestly', () => {
    const m = manifest();
    // The tool reads code and never runs it, so untrusted workspaces are fully supported.
    expect(m.capabilities.untrustedWorkspaces).toEqual({ supported: true });
    // The server reads the workspace from disk, which a virtual workspace does not have.
    expect(m.capabilities.virtualWorkspaces.supported).toBe(false);
    expect(m.capabilities.virtualWorkspaces.description).toMatch(/disk/);
  });

  it('pins the VS Code engine to what vscode-languageclient and @types/vscode need', () => {
    const m = manifest();
    const clientLib = JSON.parse(fs.readFileSync(path.join(REPO, 'node_modules', 'vscode-languageclient', 'package.json'), 'utf8'));
    const types = JSON.parse(fs.readFileSync(path.join(REPO, 'node_modules', '@types', 'vscode', 'package.json'), 'utf8'));
    expect(m.engines.vscode).toBe(clientLib.engines.vscode);
    expect(m.engines.vscode).toBe(`^${types.version}`);
    expect(m.devDependencies['vscode-languageclient']).toBe(clientLib.version);
  });
});
