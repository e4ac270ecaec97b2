// A second, independent editor end to end: Debian's Neovim 0.7 (built-in LSP client), headless, opens a flagged file
// with `noisewise server --stdio`, receives the diagnostics, requests and applies the preferred quick fix, and the
// finding disappears. Without nvim the test fails in CI (CI is set) and is skipped, visibly, elsewhere.
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { BIN, REPO, requireBundle, tempWorkspace } from './lsp-client';

const nvim = spawnSync('nvim', ['--version'], { encoding: 'utf8' });
const available = nvim.status === 0;
const inCi = Boolean(process.env.CI);
const INSTALL = 'apt-get install -y neovim';

describe('Neovim 0.7 as an LSP client', () => {
  if (!available && inCi) {
    it('needs nvim in CI', () => {
      throw new Error(`nvim is not installed, and CI is set: install it (${INSTALL}); .ci/run does.`);
    });
    return;
  }
  it.skipIf(!available)(`opens a flagged file, applies the preferred quick fix and sees the finding go${available ? '' : ` (skipped: nvim is missing; ${INSTALL})`}`, () => {
    requireBundle();
    const text = fs.readFileSync(path.join(REPO, 'rules', 'unconstrained-std', 'cases', 'fix-basic.py'), 'utf8');
    const root = tempWorkspace({ 'stage/layers.py': text });
    const file = path.join(root, 'stage', 'layers.py');
    const home = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-nvim-home-'));
    const out = path.join(home, 'report.json');
    const run = spawnSync('nvim', ['--headless', '--clean', '-u', 'NONE', '-i', 'NONE', '-c', `luafile ${path.join(__dirname, 'neovim', 'driver.lua')}`], {
      cwd: root,
      env: { ...process.env, HOME: home, XDG_CONFIG_HOME: path.join(home, '.config'), XDG_DATA_HOME: path.join(home, '.local', 'share'), XDG_STATE_HOME: path.join(home, '.local', 'state'), XDG_CACHE_HOME: path.join(home, '.cache'), NW_ROOT: root, NW_FILE: file, NW_OUT: out, NW_BIN: BIN, NW_NODE: process.execPath },
      encoding: 'utf8',
      timeout: 60_000,
    });
    const report = fs.existsSync(out) ? JSON.parse(fs.readFileSync(out, 'utf8')) : null;
    expect(report, `nvim wrote no report (exit ${run.status}); stderr: ${run.stderr}`).not.toBeNull();
    expect(report.reason, `steps: ${JSON.stringify(report.steps)}`).toBe('ok');
    expect(run.status).toBe(0);
    expect(report.steps).toEqual(['attached', 'diagnostics', 'code actions', 'applied', 'cleared']);
    expect(report.before).toBe(2);
    expect(report.code).toBe('unconstrained-std');
    const lines = text.split('\n');
    const range = report.range as { start: { line: number; character: number }; end: { line: number; character: number } };
    expect(lines[range.start.line]!.slice(range.start.character, range.end.character)).toBe('self.w_sigma');
    expect(report.titles).toContain('Store log w_sigma as `log_w_sigma` and use `.exp()`');
    expect(report.after).toBe(0);
    expect(`${report.text}\n`).toBe(fs.readFileSync(path.join(REPO, 'rules', 'unconstrained-std', 'cases', 'fix-basic.fixed.py'), 'utf8'));
  });
});
