// The CLI and server set V8's compiler budgets before any analysis code runs (server/src/cli/v8-tuning.ts).
import { execFileSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { applyV8Tuning, V8_TUNING_FLAGS } from '../server/src/cli/v8-tuning';
import { requireBundle } from './helpers/cli-run';

const root = path.resolve(__dirname, '..');

describe('V8 compiler budgets', () => {
  it('are the first import of the bundle entry point, so they apply before analysis code is compiled', () => {
    const main = fs.readFileSync(path.join(root, 'server/src/cli/main.ts'), 'utf8');
    const firstImport = main.split('\n').find((line) => line.startsWith('import '));
    expect(firstImport).toBe("import './v8-tuning';");
  });

  it('sit in the bundle before the engine', () => {
    requireBundle();
    const bundle = fs.readFileSync(path.join(root, 'server/dist/noisewise.js'), 'utf8');
    const tuning = bundle.indexOf('// server/src/cli/v8-tuning.ts');
    const engine = bundle.indexOf('// server/src/engine/check.ts');
    expect(tuning).toBeGreaterThan(-1);
    expect(engine).toBeGreaterThan(tuning);
  });

  it('are the same list in the bundle runner, which sets them before compiling (a code cache is tied to the flags)', () => {
    const runner = require(path.join(root, 'server/bin/run-bundle.js')) as { V8_TUNING_FLAGS: string[] };
    expect(runner.V8_TUNING_FLAGS).toEqual(V8_TUNING_FLAGS);
  });

  it('are flags this V8 knows, and NOISEWISE_V8_DEFAULTS=1 keeps the defaults', () => {
    // V8 ignores an unknown flag silently through setFlagsFromString; `node --v8-options` lists the real ones.
    const known = execFileSync(process.execPath, ['--v8-options'], { encoding: 'utf8' });
    for (const flag of V8_TUNING_FLAGS) {
      const name = flag.replace(/^--/, '').replace(/=.*$/, '');
      expect(known).toContain(`--${name} `);
    }
    expect(applyV8Tuning({ NOISEWISE_V8_DEFAULTS: '1' })).toBe(false);
    expect(applyV8Tuning({})).toBe(true);
  });
});
