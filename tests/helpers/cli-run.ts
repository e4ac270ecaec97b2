// Runs the real built CLI (server/bin/noisewise.js) in a child process and makes temporary copies of fixture folders for it.
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';

/** The repository root. */
export const REPO = path.resolve(__dirname, '..', '..');
/** The launcher the `noisewise` bin runs. */
export const BIN = path.join(REPO, 'server', 'bin', 'noisewise.js');
/** The CLI test fixtures. */
export const CLI_FIXTURES = path.join(REPO, 'tests', 'fixtures', 'cli');

/** Output of one CLI run. */
export interface CliRun {
  code: number | null;
  stdout: string;
  stderr: string;
}

/** Throws with the build command when the bundle has not been built (npm test builds it first). */
export function requireBundle(): void {
  if (!fs.existsSync(path.join(REPO, 'server', 'dist', 'noisewise.js'))) {
    throw new Error('server/dist/noisewise.js is missing: run `npm run build` (npm test does it in pretest)');
  }
}

/** Runs `noisewise ARGS` in `cwd` with a clean colour environment. */
export function runNoisewise(args: string[], cwd: string, env: Record<string, string> = {}): CliRun {
  const childEnv: Record<string, string | undefined> = { ...process.env, ...env };
  delete childEnv.FORCE_COLOR;
  if (!('NO_COLOR' in env)) delete childEnv.NO_COLOR;
  const result = spawnSync(process.execPath, [BIN, ...args], { cwd, env: childEnv, encoding: 'utf8', timeout: 30_000 });
  if (result.error) throw result.error;
  return { code: result.status, stdout: result.stdout, stderr: result.stderr };
}

/** Copies a fixture folder into a fresh temporary folder and returns the copy's path. */
export function copyFixture(name: string): string {
  const parent = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-cli-')));
  const target = path.join(parent, name);
  fs.cpSync(path.join(CLI_FIXTURES, name), target, { recursive: true });
  return target;
}

/** Removes a copy made by copyFixture (its temporary parent folder included). */
export function removeCopy(copy: string): void {
  fs.rmSync(path.dirname(copy), { recursive: true, force: true });
}

/** Adds the files that cannot live in the repository as text to a copy of the `messy` fixture: a binary file and a latin-1 file. */
export function addMessyBinaries(copy: string): void {
  fs.writeFileSync(path.join(copy, 'weights_dump.py'), Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x00, 0x00, 0x0d, 0x0a]));
  const latin1 = [
    '# -*- coding: latin-1 -*-',
    '"""Débit de la rivière : échelle apprise du bruit."""',
    'import torch',
    'from torch import nn',
    '',
    '',
    'class Echelle(nn.Module):',
    '    def __init__(self):',
    '        super().__init__()',
    '        self.moy = nn.Parameter(torch.zeros(2))',
    '        self.ecart = nn.Parameter(torch.ones(2))',
    '',
    '    def forward(self):',
    '        débit = self.moy + self.ecart * torch.randn_like(self.moy)',
    '        return débit',
    '',
  ].join('\n');
  fs.writeFileSync(path.join(copy, 'debit_latin1.py'), Buffer.from(latin1, 'latin1'));
}
