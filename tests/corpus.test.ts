// Scores the rules against corpora written to the contract in RULES.md (tests/corpus/<rule>/) and against the demo
// workspace's expected findings: exact match of (path, cell, line, rule), reported as precision and recall.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { allRules } from '../rules/index';
import { cliLocation } from '../server/src/parse/locations';
import { checkPath } from './helpers/engine';

interface Expected {
  rule: string;
  path: string;
  line: number;
  cell?: number;
}

/** Known, explained gaps of a rule on its corpus (each with its cause and the issue that tracks it). */
interface KnownGaps {
  falsePositives: { key: string; cause: string }[];
  falseNegatives: { key: string; cause: string }[];
}

const key = (e: Expected) => `${e.rule} ${e.path}${e.cell !== undefined ? `#${e.cell}` : ''}:${e.line}`;

/** Runs the engine on a folder and scores its findings (for the given rules) against an expected list. */
async function score(folder: string, expected: Expected[], rules: string[], ignore: (p: string) => boolean) {
  const reports = await checkPath(folder, { only: rules });
  const got = new Set<string>();
  for (const report of reports) {
    if (ignore(report.path)) continue;
    for (const f of report.findings) {
      if (!rules.includes(f.rule)) continue;
      const at = cliLocation(report, f.start);
      got.add(key({ rule: f.rule, path: report.path, line: at.line, cell: at.cell }));
    }
    expect(report.notes.filter((n) => n.kind === 'internal')).toEqual([]);
  }
  const want = new Set(expected.filter((e) => rules.includes(e.rule)).map(key));
  const truePositives = [...got].filter((k) => want.has(k));
  return {
    precision: got.size === 0 ? 1 : truePositives.length / got.size,
    recall: want.size === 0 ? 1 : truePositives.length / want.size,
    falsePositives: [...got].filter((k) => !want.has(k)).sort(),
    falseNegatives: [...want].filter((k) => !got.has(k)).sort(),
    expected: want.size,
  };
}

const implemented = allRules.map((r) => r.meta.id);
const corpusRoot = path.resolve(__dirname, 'corpus');

describe('evaluation corpora', () => {
  const corpora = fs.existsSync(corpusRoot) ? fs.readdirSync(corpusRoot).filter((d) => fs.existsSync(path.join(corpusRoot, d, 'expected.json'))) : [];
  it('exist for the implemented core rules', () => {
    expect(corpora).toContain('unconstrained-std');
  });
  for (const rule of corpora.filter((c) => implemented.includes(c))) {
    it(`${rule}: finds what the contract requires and stays quiet on the look-alikes`, async () => {
      const folder = path.join(corpusRoot, rule);
      const expected = (JSON.parse(fs.readFileSync(path.join(folder, 'expected.json'), 'utf8')) as { findings: Expected[] }).findings;
      const result = await score(folder, expected, [rule], (p) => p.startsWith('ambiguous/'));
      // Printed so that a run shows the figures, not only pass/fail.
      process.stdout.write(`corpus ${rule}: precision ${result.precision.toFixed(3)}, recall ${result.recall.toFixed(3)} over ${result.expected} expected findings\n`);
      // Misses and false alarms not fixed yet are listed with their cause in known-gaps.json; the test fails on any
      // new one and on any listed one that no longer happens (then the list must shrink), so the list stays true.
      const gapsFile = path.join(folder, 'known-gaps.json');
      const gaps = fs.existsSync(gapsFile) ? (JSON.parse(fs.readFileSync(gapsFile, 'utf8')) as KnownGaps) : { falsePositives: [], falseNegatives: [] };
      expect({ falsePositives: result.falsePositives, falseNegatives: result.falseNegatives }).toEqual({
        falsePositives: gaps.falsePositives.map((g) => g.key).sort(),
        falseNegatives: gaps.falseNegatives.map((g) => g.key).sort(),
      });
    });
  }
});

describe('demo workspace', () => {
  it('reports exactly the expected findings of the implemented rules', async () => {
    const folder = path.resolve(__dirname, '..', 'test-workspaces', 'river-lab');
    const expected = (JSON.parse(fs.readFileSync(path.join(folder, 'expected.json'), 'utf8')) as { findings: Expected[] }).findings;
    const rules = implemented.filter((id) => id !== 'unexplained-allow');
    const result = await score(folder, expected, rules, () => false);
    expect({ falsePositives: result.falsePositives, falseNegatives: result.falseNegatives }).toEqual({ falsePositives: [], falseNegatives: [] });
  });
});
