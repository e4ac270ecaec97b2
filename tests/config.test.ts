// `[tool.noisewise]` in pyproject.toml: strict validation, the nearest-file search, the per-folder cache, excludes and engine settings.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeEach, describe, expect, it } from 'vitest';
import { clearConfigCache, ConfigError, isExcluded, loadConfigFor, loadConfigForDir, parseConfigText, toEngineSettings } from '../server/src/engine/config';

const IDS = ['unconstrained-std', 'kl-weight-scale', 'mc-samples-identical'];

function parseError(text: string): string {
  try {
    parseConfigText(text, 'pyproject.toml', IDS);
  } catch (error) {
    expect(error).toBeInstanceOf(ConfigError);
    return (error as Error).message;
  }
  throw new Error('expected a ConfigError');
}

describe('parseConfigText', () => {
  it('reads every key', () => {
    const parsed = parseConfigText(
      [
        '[project]',
        'name = "river-stage"',
        '',
        '[tool.noisewise]',
        'severity = { unconstrained-std = "error", kl-weight-scale = "off", mc-samples-identical = "info" }',
        'exclude = ["legacy/**", "scratch_*.py"]',
        'dataset-size-names = ["n_gauge_days", "cfg.n_train"]',
      ].join('\n'),
      'pyproject.toml',
      IDS,
    );
    expect(parsed).toEqual({
      hasTable: true,
      severity: { 'unconstrained-std': 'error', 'kl-weight-scale': 'off', 'mc-samples-identical': 'info' },
      exclude: ['legacy/**', 'scratch_*.py'],
      datasetSizeNames: ['n_gauge_days', 'cfg.n_train'],
    });
  });

  it('accepts a severity sub-table and the hint word', () => {
    const parsed = parseConfigText('[tool.noisewise.severity]\nunconstrained-std = "hint"\n', 'p', IDS);
    expect(parsed.severity).toEqual({ 'unconstrained-std': 'hint' });
  });

  it('gives an empty configuration when there is no tool table or no noisewise table', () => {
    expect(parseConfigText('[project]\nname = "x"\n', 'p', IDS)).toEqual({ hasTable: false, severity: {}, exclude: [], datasetSizeNames: [] });
    expect(parseConfigText('[tool.black]\nline-length = 100\n', 'p', IDS).hasTable).toBe(false);
  });

  it('names the file, line and column of a TOML syntax error', () => {
    expect(parseError('[tool.noisewise\nexclude = []\n')).toMatch(/^pyproject\.toml:1:\d+: not valid TOML/);
  });

  it('rejects unknown keys with a suggestion', () => {
    expect(parseError('[tool.noisewise]\nexclud = ["a"]\n')).toMatch(/unknown key "tool\.noisewise\.exclud" \(did you mean "exclude"\?\)/);
    expect(parseError('[tool.noisewise]\ncolour = true\n')).toMatch(/unknown key "tool\.noisewise\.colour"; the keys are severity, exclude, dataset-size-names/);
  });

  it('rejects wrong types', () => {
    expect(parseError('[tool.noisewise]\nexclude = "legacy"\n')).toMatch(/"tool\.noisewise\.exclude" must be a list of glob strings/);
    expect(parseError('[tool.noisewise]\nexclude = ["a", 3]\n')).toMatch(/"tool\.noisewise\.exclude\[1\]" must be a string/);
    expect(parseError('[tool.noisewise]\nseverity = "error"\n')).toMatch(/"tool\.noisewise\.severity" must be a table/);
    expect(parseError('[tool.noisewise]\nseverity = { unconstrained-std = 3 }\n')).toMatch(/"tool\.noisewise\.severity\.unconstrained-std" must be a string/);
    expect(parseError('[tool.noisewise]\ndataset-size-names = "n"\n')).toMatch(/dataset-size-names" must be a list of Python names/);
    expect(parseError('tool = 3\n')).toMatch(/"tool" must be a table/);
    expect(parseError('[tool]\nnoisewise = 1\n')).toMatch(/\[tool\.noisewise\] must be a table/);
  });

  it('rejects unknown severity words, pointing from "information" to "info"', () => {
    expect(parseError('[tool.noisewise]\nseverity = { unconstrained-std = "fatal" }\n')).toMatch(/unknown severity "fatal"; use one of "off", "hint", "info", "warning", "error"/);
    expect(parseError('[tool.noisewise]\nseverity = { unconstrained-std = "information" }\n')).toMatch(/\(write "info"\)/);
  });

  it('rejects unknown rule ids with a suggestion', () => {
    expect(parseError('[tool.noisewise]\nseverity = { unconstrained-sd = "error" }\n')).toMatch(/unknown rule id "unconstrained-sd" \(did you mean "unconstrained-std"\?\)/);
    expect(parseError('[tool.noisewise]\nseverity = { whatever = "error" }\n')).toMatch(/unknown rule id "whatever"; run `noisewise rules`/);
  });

  it('rejects empty, absolute and malformed globs and invalid dataset-size names', () => {
    expect(parseError('[tool.noisewise]\nexclude = [" "]\n')).toMatch(/exclude\[0\]" is empty/);
    expect(parseError('[tool.noisewise]\nexclude = ["/abs/path"]\n')).toMatch(/must be relative/);
    expect(parseError('[tool.noisewise]\ndataset-size-names = ["len(train)"]\n')).toMatch(/is not a Python name or dotted name/);
    expect(parseError('[tool.noisewise]\ndataset-size-names = ["2n"]\n')).toMatch(/dataset-size-names\[0\]/);
  });
});

describe('toEngineSettings', () => {
  it('maps info to information and keeps the other words', () => {
    expect(toEngineSettings({ severity: { a: 'info', b: 'off', c: 'hint', d: 'error' }, datasetSizeNames: ['n_rows'] })).toEqual({
      severity: { a: 'information', b: 'off', c: 'hint', d: 'error' },
      datasetSizeNames: ['n_rows'],
    });
  });
});

describe('loadConfigFor', () => {
  const root = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-config-'));
  afterAll(() => fs.rmSync(root, { recursive: true, force: true }));
  beforeEach(() => clearConfigCache());

  function write(rel: string, text: string): string {
    const file = path.join(root, rel);
    fs.mkdirSync(path.dirname(file), { recursive: true });
    fs.writeFileSync(file, text);
    return file;
  }

  it('finds the nearest pyproject.toml above a file and makes its folder the root', () => {
    write('lab/pyproject.toml', '[tool.noisewise]\nseverity = { unconstrained-std = "error" }\nexclude = ["legacy/**"]\n');
    const file = write('lab/src/models/bnn.py', 'x = 1\n');
    const config = loadConfigFor(file, IDS);
    expect(config.file).toBe(path.join(root, 'lab', 'pyproject.toml'));
    expect(config.root).toBe(path.join(root, 'lab'));
    expect(config.severity).toEqual({ 'unconstrained-std': 'error' });
    expect(config.exclude).toEqual(['legacy/**']);
  });

  it('uses a nested pyproject.toml for its own subtree, even without a noisewise table', () => {
    write('lab/pyproject.toml', '[tool.noisewise]\nseverity = { unconstrained-std = "error" }\n');
    write('lab/sub/pyproject.toml', '[project]\nname = "sub"\n');
    const config = loadConfigFor(write('lab/sub/a.py', ''), IDS);
    expect(config.file).toBe(path.join(root, 'lab', 'sub', 'pyproject.toml'));
    expect(config.severity).toEqual({});
  });

  it('falls back to an empty configuration rooted at the start folder when there is none', () => {
    const isolated = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-noconfig-'));
    try {
      const dir = path.join(isolated, 'a', 'b');
      fs.mkdirSync(dir, { recursive: true });
      const config = loadConfigForDir(dir, IDS);
      expect(config).toEqual({ file: null, root: dir, severity: {}, exclude: [], datasetSizeNames: [] });
      // The cached empty result of a parent folder is rooted at that folder, not at the first folder asked about.
      expect(loadConfigForDir(path.join(isolated, 'a'), IDS).root).toBe(path.join(isolated, 'a'));
      expect(loadConfigForDir(path.join(isolated, 'a', 'b', 'c'), IDS).root).toBe(path.join(isolated, 'a', 'b', 'c'));
    } finally {
      fs.rmSync(isolated, { recursive: true, force: true });
    }
  });

  it('caches per folder until the cache is cleared', () => {
    const file = write('cache/pyproject.toml', '[tool.noisewise]\nexclude = ["a"]\n');
    const py = write('cache/x.py', '');
    expect(loadConfigFor(py, IDS).exclude).toEqual(['a']);
    fs.writeFileSync(file, '[tool.noisewise]\nexclude = ["b"]\n');
    expect(loadConfigFor(py, IDS).exclude).toEqual(['a']);
    expect(loadConfigFor(py, IDS)).toBe(loadConfigFor(py, IDS));
    clearConfigCache();
    expect(loadConfigFor(py, IDS).exclude).toEqual(['b']);
  });

  it('throws a ConfigError naming the file for a broken pyproject.toml', () => {
    const file = write('broken/pyproject.toml', '[tool.noisewise]\nseverity = { nope = "error" }\n');
    expect(() => loadConfigFor(write('broken/x.py', ''), IDS)).toThrow(ConfigError);
    expect(() => loadConfigFor(path.join(root, 'broken', 'x.py'), IDS)).toThrow(file);
  });

  it('validates rule ids against the list it is given', () => {
    write('ids/pyproject.toml', '[tool.noisewise]\nseverity = { kl-weight-scale = "error" }\n');
    const py = write('ids/x.py', '');
    expect(loadConfigFor(py, IDS).severity).toEqual({ 'kl-weight-scale': 'error' });
    expect(() => loadConfigFor(py, ['unconstrained-std'])).toThrow(/unknown rule id "kl-weight-scale"/);
  });
});

describe('isExcluded', () => {
  const config = { file: '/p/pyproject.toml', root: '/p', severity: {}, exclude: ['legacy', 'scratch_*.py', '**/generated/**', '.hidden/*.py'], datasetSizeNames: [] };

  it('matches paths relative to the root, including dot files, and everything under a matched folder', () => {
    expect(isExcluded(config, '/p/legacy')).toBe(true);
    expect(isExcluded(config, '/p/legacy/old/model.py')).toBe(true);
    expect(isExcluded(config, '/p/scratch_1.py')).toBe(true);
    expect(isExcluded(config, '/p/src/scratch_1.py')).toBe(false);
    expect(isExcluded(config, '/p/src/generated/a.py')).toBe(true);
    expect(isExcluded(config, '/p/.hidden/a.py')).toBe(true);
    expect(isExcluded(config, '/p/src/model.py')).toBe(false);
  });

  it('never excludes the root itself or paths outside it', () => {
    expect(isExcluded(config, '/p')).toBe(false);
    expect(isExcluded(config, '/elsewhere/legacy/a.py')).toBe(false);
    expect(isExcluded({ ...config, exclude: [] }, '/p/legacy')).toBe(false);
  });
});
