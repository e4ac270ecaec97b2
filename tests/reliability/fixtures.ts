// Every fixture of the repository as reliability-test input: rule cases (single files and folder workspaces), the demo
// workspace and the evaluation corpus, each as a small workspace of in-memory files; plus the property-run budget and
// the counts the suites report.
import * as fs from 'node:fs';
import * as path from 'node:path';

/** The repository root. */
export const REPO = path.resolve(__dirname, '..', '..');

/** One file of a fixture workspace. */
export interface FixtureFile {
  /** Path relative to the workspace root, with forward slashes. */
  rel: string;
  text: string;
}

/** A fixture: one file, or a folder checked as one workspace. */
export interface Fixture {
  /** Where it comes from, relative to the repository (for failure messages). */
  label: string;
  files: FixtureFile[];
}

function sourcesUnder(dir: string): string[] {
  const out: string[] = [];
  const stack = [dir];
  while (stack.length > 0) {
    const current = stack.pop()!;
    for (const entry of fs.readdirSync(current, { withFileTypes: true })) {
      const full = path.join(current, entry.name);
      if (entry.isDirectory()) stack.push(full);
      else if (/\.(py|ipynb)$/.test(entry.name)) out.push(full);
    }
  }
  return out.sort();
}

function folderFixture(dir: string): Fixture {
  return {
    label: path.relative(REPO, dir),
    files: sourcesUnder(dir).map((f) => ({ rel: path.relative(dir, f).split(path.sep).join('/'), text: fs.readFileSync(f, 'utf8') })),
  };
}

/**
 * Every fixture: each rule case (a file, or a folder as one workspace), the demo workspace, and each project of the
 * evaluation corpus (a folder there is one workspace, a loose file its own). Read fresh on every call, in path order.
 */
export function allFixtures(): Fixture[] {
  const out: Fixture[] = [];
  const rulesDir = path.join(REPO, 'rules');
  for (const rule of fs.readdirSync(rulesDir).sort()) {
    const cases = path.join(rulesDir, rule, 'cases');
    if (!fs.existsSync(cases)) continue;
    for (const entry of fs.readdirSync(cases, { withFileTypes: true }).sort((a, b) => (a.name < b.name ? -1 : 1))) {
      const full = path.join(cases, entry.name);
      if (entry.isDirectory()) out.push(folderFixture(full));
      else if (/\.(py|ipynb)$/.test(entry.name)) out.push({ label: path.relative(REPO, full), files: [{ rel: entry.name, text: fs.readFileSync(full, 'utf8') }] });
    }
  }
  const workspaces = path.join(REPO, 'test-workspaces');
  for (const name of fs.readdirSync(workspaces).sort()) {
    if (fs.statSync(path.join(workspaces, name)).isDirectory()) out.push(folderFixture(path.join(workspaces, name)));
  }
  const corpus = path.join(REPO, 'tests', 'corpus');
  for (const rule of fs.readdirSync(corpus).sort()) {
    const dir = path.join(corpus, rule);
    if (!fs.statSync(dir).isDirectory()) continue;
    for (const entry of fs.readdirSync(dir, { withFileTypes: true }).sort((a, b) => (a.name < b.name ? -1 : 1))) {
      const full = path.join(dir, entry.name);
      if (entry.isDirectory()) {
        const fixture = folderFixture(full);
        if (fixture.files.length > 0) out.push(fixture);
      } else if (/\.(py|ipynb)$/.test(entry.name)) out.push({ label: path.relative(REPO, full), files: [{ rel: entry.name, text: fs.readFileSync(full, 'utf8') }] });
    }
  }
  return out;
}

/** Every Python file of every fixture (notebooks left out), for the suites that edit plain Python text. */
export function allPythonTexts(): { label: string; text: string }[] {
  return allFixtures().flatMap((f) => f.files.filter((x) => x.rel.endsWith('.py')).map((x) => ({ label: `${f.label}${f.files.length > 1 ? `/${x.rel}` : ''}`, text: x.text })));
}

/** True under `npm run test:stress` (NOISEWISE_STRESS=1): property suites run many more cases. */
export const STRESS = process.env.NOISEWISE_STRESS === '1';

/** The number of property runs: `normal` in `npm test`, `stress` under NOISEWISE_STRESS=1. */
export function runs(normal: number, stress: number): number {
  return STRESS ? stress : normal;
}

/** A fast-check seed fixed for `npm test` (reproducible) unless NOISEWISE_SEED gives one; random under stress. */
export function seed(): number | undefined {
  if (process.env.NOISEWISE_SEED) return Number(process.env.NOISEWISE_SEED);
  return STRESS ? undefined : 20_240_601;
}

const COUNTS_FILE = path.join(REPO, 'test-results', 'reliability-counts.jsonl');

/**
 * Records a count of what a suite tried (inputs, edit sequences, fixes checked) as one line of
 * test-results/reliability-counts.jsonl (appended, so suites running in parallel processes do not clobber each
 * other), for the closing note of a run; also printed.
 */
export function recordCount(name: string, amount: number): void {
  fs.mkdirSync(path.dirname(COUNTS_FILE), { recursive: true });
  fs.appendFileSync(COUNTS_FILE, `${JSON.stringify({ name, amount, stress: STRESS, at: new Date().toISOString() })}\n`);
  process.stdout.write(`reliability count: ${name} += ${amount}\n`);
}
