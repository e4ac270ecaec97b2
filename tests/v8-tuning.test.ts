// The bundle runner (server/bin/run-bundle.js) sets V8's compiler budgets before the bundle is compiled. That they
// change V8's flags at all is shown by tests/code-cache.test.ts (a cache made with NOISEWISE_V8_DEFAULTS=1 is rejected
// under the tuned flags); here: every flag is one this V8 knows (setFlagsFromString ignores unknown ones silently).
import { execFileSync } from 'node:child_process';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';

const runner = require(path.resolve(__dirname, '..', 'server', 'bin', 'run-bundle.js')) as { V8_TUNING_FLAGS: string[] };

describe('V8 compiler budgets', () => {
  it('are flags this V8 knows, with values', () => {
    const known = execFileSync(process.execPath, ['--v8-options'], { encoding: 'utf8' });
    expect(runner.V8_TUNING_FLAGS.length).toBeGreaterThan(0);
    for (const flag of runner.V8_TUNING_FLAGS) {
      const match = /^--([a-z-]+)=(\d+)$/.exec(flag);
      expect(match, flag).not.toBeNull();
      expect(known).toContain(`--${match![1]} `);
    }
  });
});
