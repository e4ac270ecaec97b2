// `noisewise check --jobs N` splits the workspace over worker threads; whatever the split, the output must be the
// same as a check in one thread (cross-file findings included), and the splitting itself must be balanced.
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { effectiveJobs, shareFiles } from '../server/src/cli/parallel';
import { REPO, requireBundle, runNoisewise } from './helpers/cli-run';

describe('parallel check', () => {
  it('gives byte-identical JSON with 1, 2 and 3 workers on multi-file workspaces', () => {
    requireBundle();
    for (const folder of ['test-workspaces/river-lab', 'tests/corpus']) {
      const outputs = [1, 2, 3].map((jobs) => runNoisewise(['check', folder, '--format', 'json', '--jobs', String(jobs)], REPO));
      for (const out of outputs) expect(out.stderr).not.toMatch(/internal error|worker/);
      expect(outputs[0]!.code).toBe(1);
      expect(JSON.parse(outputs[0]!.stdout).findings.length).toBeGreaterThan(5);
      expect(outputs[1]!.stdout).toBe(outputs[0]!.stdout);
      expect(outputs[2]!.stdout).toBe(outputs[0]!.stdout);
      expect(outputs.map((o) => o.code)).toEqual([1, 1, 1]);
    }
  });

  it('rejects a --jobs value that is not a positive whole number', () => {
    requireBundle();
    for (const value of ['0', '-1', 'two', '1.5']) expect(runNoisewise(['check', '.', '--jobs', value], REPO).code).toBe(2);
  });

  it('shares files in path order and in balanced sizes', () => {
    const inputs = Array.from({ length: 10 }, (_, i) => ({ path: `f${i}.py`, absPath: path.join('/w', `f${9 - i}.py`), text: 'x'.repeat(100 * (i + 1)) }));
    const shares = shareFiles(inputs, 3);
    expect(shares.flat().sort((a, b) => a - b)).toEqual([...Array(10).keys()]);
    const sizes = shares.map((s) => s.reduce((n, i) => n + inputs[i]!.text.length, 0));
    const total = sizes.reduce((a, b) => a + b, 0);
    for (const size of sizes) expect(size).toBeLessThan(total * 0.5);
    // Neighbouring paths stay together: every share is a contiguous run in path order.
    const byPath = [...inputs.keys()].sort((a, b) => (inputs[a]!.absPath < inputs[b]!.absPath ? -1 : 1));
    for (const share of shares) {
      const positions = share.map((i) => byPath.indexOf(i)).sort((a, b) => a - b);
      expect(positions[positions.length - 1]! - positions[0]!).toBe(positions.length - 1);
    }
  });

  it('uses one thread for small inputs unless told otherwise', () => {
    const small = [{ path: 'a.py', absPath: '/w/a.py', text: 'x = 1\n' }, { path: 'b.py', absPath: '/w/b.py', text: 'y = 2\n' }];
    expect(effectiveJobs(null, small)).toBe(1);
    expect(effectiveJobs(2, small)).toBe(2);
    expect(effectiveJobs(8, small)).toBe(2);
    expect(effectiveJobs(1, small)).toBe(1);
  });
});
