// Real VS Code end to end (`npm run test:e2e`): the packaged .vsix installed into code-server 4.100.3 (VS Code 1.100.3
// in the browser), driven in Debian's Chromium by playwright-core. Opens a demo file and the demo notebook from
// test-workspaces/river-lab, reads the findings in the Problems panel, hovers one and reads its figures, applies the
// preferred quick fix with the keyboard and sees the finding go. Screenshots of every step go to test-results/e2e/.
// Everything listens on 127.0.0.1, HOME and every profile live in a temporary folder, and code-server's whole process
// group is stopped at the end.
import { type ChildProcess, execFileSync, spawn } from 'node:child_process';
import * as fs from 'node:fs';
import * as net from 'node:net';
import * as os from 'node:os';
import * as path from 'node:path';
import { type Browser, chromium, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

const REPO = path.resolve(__dirname, '..', '..');
const SHOTS = path.join(REPO, 'test-results', 'e2e');
const CACHE = process.env.NOISEWISE_E2E_CACHE ?? path.join(os.homedir(), '.cache', 'noisewise-e2e');
const CODE_SERVER = path.join(CACHE, 'code-server-4.100.3', 'node_modules', 'code-server', 'out', 'node', 'entry.js');
const CHROMIUM = process.env.NOISEWISE_CHROMIUM ?? '/usr/bin/chromium';

async function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const server = net.createServer();
    server.once('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const port = (server.address() as net.AddressInfo).port;
      server.close(() => resolve(port));
    });
  });
}

async function until<T>(what: string, probe: () => Promise<T | null | undefined | false>, timeoutMs: number): Promise<T> {
  const deadline = Date.now() + timeoutMs;
  let last: unknown;
  while (Date.now() < deadline) {
    try {
      const value = await probe();
      if (value) return value;
    } catch (error) {
      last = error;
    }
    await new Promise((r) => setTimeout(r, 250));
  }
  throw new Error(`timed out waiting for ${what}${last ? ` (last error: ${(last as Error).message})` : ''}`);
}

describe('noisewise in VS Code (code-server 4.100.3, Chromium)', () => {
  let temp: string;
  let workspace: string;
  let server: ChildProcess | null = null;
  let browser: Browser | null = null;
  let page: Page;
  let step = 0;

  const shot = async (name: string): Promise<void> => {
    step++;
    await page.screenshot({ path: path.join(SHOTS, `${String(step).padStart(2, '0')}-${name}.png`) });
  };

  /** The text of every row of the Problems panel (opening the panel when it is closed). */
  const problems = async (): Promise<string[]> => {
    if (!(await page.locator('.markers-panel').isVisible())) await page.keyboard.press('Control+Shift+M');
    // The accessible label has the message and position; the visible text adds the source and the rule id.
    return page.$$eval('.markers-panel .monaco-list-row', (rows) => rows.map((r) => `${r.getAttribute('aria-label') ?? ''} || ${r.textContent ?? ''}`));
  };

  /** Opens a workspace file with Quick Open, typing its name and choosing it with Enter. */
  const openFile = async (name: string): Promise<void> => {
    await page.keyboard.press('Escape');
    await page.keyboard.press('Control+P');
    await page.locator('.quick-input-widget').waitFor({ state: 'visible', timeout: 15_000 });
    await page.keyboard.type(name);
    await until(`Quick Open to list ${name}`, async () => (await page.locator('.quick-input-list .monaco-list-row', { hasText: name }).count()) > 0, 20_000);
    await page.keyboard.press('Enter');
    await page.getByRole('tab', { name: new RegExp(name.replace('.', '\\.')) }).first().waitFor({ state: 'visible', timeout: 20_000 });
  };

  /** The server's log (the extension's output channel), for failure messages. */
  const serverLog = (): string => {
    const found: string[] = [];
    const walk = (dir: string): void => {
      for (const entry of fs.existsSync(dir) ? fs.readdirSync(dir, { withFileTypes: true }) : []) {
        const full = path.join(dir, entry.name);
        if (entry.isDirectory()) walk(full);
        else if (/noisewise/i.test(full) && full.endsWith('.log')) found.push(`${full}:\n${fs.readFileSync(full, 'utf8').slice(-4000)}`);
      }
    };
    walk(path.join(temp, 'data', 'logs'));
    return found.join('\n') || '(no noisewise log found)';
  };

  beforeAll(async () => {
    if (!fs.existsSync(CODE_SERVER)) throw new Error(`code-server 4.100.3 is not installed in ${CACHE}: run scripts/install-code-server.sh`);
    if (!fs.existsSync(CHROMIUM)) throw new Error(`Chromium is missing (${CHROMIUM}): apt-get install -y chromium`);
    fs.rmSync(SHOTS, { recursive: true, force: true });
    fs.mkdirSync(SHOTS, { recursive: true });
    temp = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-e2e-')));
    const home = path.join(temp, 'home');
    const data = path.join(temp, 'data');
    const extensions = path.join(temp, 'extensions');
    workspace = path.join(temp, 'river-lab');
    fs.mkdirSync(home);
    fs.mkdirSync(path.join(data, 'User'), { recursive: true });
    fs.cpSync(path.join(REPO, 'test-workspaces', 'river-lab'), workspace, { recursive: true });
    fs.writeFileSync(
      path.join(data, 'User', 'settings.json'),
      JSON.stringify({
        'workbench.startupEditor': 'none',
        'workbench.tips.enabled': false,
        'workbench.welcomePage.walkthroughs.openOnInstall': false,
        'security.workspace.trust.enabled': false,
        'telemetry.telemetryLevel': 'off',
        'update.mode': 'none',
        'extensions.ignoreRecommendations': true,
        'extensions.autoCheckUpdates': false,
        'editor.hover.delay': 200,
        'noisewise.trace.server': 'messages',
      }),
    );
    const env = { ...process.env, HOME: home, XDG_CONFIG_HOME: path.join(home, '.config'), XDG_DATA_HOME: path.join(home, '.local', 'share'), XDG_CACHE_HOME: path.join(home, '.cache') };
    const vsix = path.join(temp, 'noisewise.vsix');
    execFileSync(process.execPath, [path.join(REPO, 'scripts', 'package-extension.mjs'), vsix], { cwd: REPO, stdio: 'pipe' });
    execFileSync(process.execPath, [CODE_SERVER, '--user-data-dir', data, '--extensions-dir', extensions, '--install-extension', vsix], { env, stdio: 'pipe' });
    const port = await freePort();
    // Its own process group (detached = setsid), so the whole group, file watcher included, can be stopped.
    server = spawn(
      process.execPath,
      [CODE_SERVER, '--bind-addr', `127.0.0.1:${port}`, '--auth', 'none', '--disable-telemetry', '--disable-update-check', '--disable-workspace-trust', '--user-data-dir', data, '--extensions-dir', extensions, workspace],
      { env, detached: true, stdio: 'ignore' },
    );
    await until('code-server /healthz', async () => (await fetch(`http://127.0.0.1:${port}/healthz`)).ok, 60_000);
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      headless: true,
      args: ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    });
    page = await browser.newPage({ viewport: { width: 1400, height: 900 } });
    await page.goto(`http://127.0.0.1:${port}/?folder=${encodeURIComponent(workspace)}`);
    await page.locator('.monaco-workbench').waitFor({ timeout: 60_000 });
    await page.locator('.explorer-folders-view .monaco-list-row', { hasText: 'riverlab' }).first().waitFor({ timeout: 60_000 });
  }, 300_000);

  afterAll(async () => {
    await browser?.close().catch(() => undefined);
    if (server?.pid) {
      try {
        process.kill(-server.pid, 'SIGTERM');
      } catch {
        // Already gone.
      }
      await new Promise((r) => setTimeout(r, 500));
      try {
        process.kill(-server.pid, 'SIGKILL');
      } catch {
        // Stopped by SIGTERM.
      }
    }
    if (temp) fs.rmSync(temp, { recursive: true, force: true });
  });

  it('shows the findings of an open file in the Problems panel with their rule ids', async () => {
    await openFile('models.py');
    await shot('models-open');
    const rows = await until(
      'the models.py findings in the Problems panel',
      async () => {
        const all = await problems();
        return all.filter((r) => r.includes('`weight_std` is trainable')).length >= 2 ? all : null;
      },
      90_000,
    ).catch((error: Error) => {
      throw new Error(`${error.message}\n${serverLog()}`);
    });
    await shot('problems-panel');
    const weightStd = rows.filter((r) => r.includes('`weight_std` is trainable'));
    for (const row of weightStd) expect(row).toContain('unconstrained-std');
    expect(rows.some((r) => r.includes('noisewise'))).toBe(true);
  });

  it('hovers a finding and shows the figures computed for this code', async () => {
    await page.locator('.editor-instance .monaco-editor .view-lines').first().click();
    await page.keyboard.press('Control+Home');
    // Go to the first problem of the file (line 19, `self.weight_std`), close the peek, show the hover there.
    await page.keyboard.press('F8');
    await page.keyboard.press('Escape');
    await page.keyboard.press('Control+K');
    await page.keyboard.press('Control+I');
    const hover = page.locator('.monaco-hover', { hasText: 'initial σ' }).first();
    await hover.waitFor({ state: 'visible', timeout: 20_000 });
    await shot('hover-figures');
    const text = (await hover.innerText()).replace(/\s+/g, ' ');
    expect(text).toContain('unconstrained-std');
    // init_std = 0.05 in the base class; log σ₀ and softplus⁻¹(σ₀) = log(exp(σ₀) − 1), check values from
    // JavaScript's Math (a general library), rounded as the hover prints them.
    expect(text).toMatch(/initial σ 0\.05/);
    expect(text).toContain(Math.log(0.05).toFixed(3));
    expect(text).toContain(Math.log(Math.exp(0.05) - 1).toFixed(3));
    expect(text).toContain('Rule page: unconstrained-std');
    await page.keyboard.press('Escape');
  });

  it('applies the preferred quick fix with the keyboard and the finding goes', async () => {
    await page.keyboard.press('Control+Home');
    await page.keyboard.press('F8');
    await page.keyboard.press('Escape');
    await page.keyboard.press('Control+.');
    const menu = page.locator('.action-widget');
    await menu.waitFor({ state: 'visible', timeout: 20_000 });
    const titles = (await menu.locator('.monaco-list-row').allInnerTexts()).map((t) => t.trim());
    const wanted = titles.findIndex((t) => t.includes('Store log weight_std as `log_weight_std`'));
    expect(wanted, `quick fixes offered: ${JSON.stringify(titles)}`).toBeGreaterThanOrEqual(0);
    expect(titles.some((t) => t.includes('Allow unconstrained-std here'))).toBe(true);
    // The first action is focused when the menu opens; move down to the wanted one.
    const first = titles.findIndex((t) => t.length > 0 && !/^(Quick Fix|More Actions)/i.test(t));
    for (let i = Math.max(0, first); i < wanted; i++) await page.keyboard.press('ArrowDown');
    await shot('quick-fix-menu');
    await page.keyboard.press('Enter');
    await until(
      'the weight_std findings to leave the Problems panel',
      async () => {
        const rows = await problems();
        return rows.length > 0 && rows.every((r) => !r.includes('`weight_std` is trainable')) ? rows : null;
      },
      60_000,
    );
    const code = await page.locator('.editor-instance .monaco-editor .view-lines').first().innerText();
    expect(code.replace(/\u00a0/g, ' ')).toContain('self.log_weight_std.exp()');
    await shot('quick-fix-applied');
  });

  it('opens a rule page offline from the command palette', async () => {
    await page.keyboard.press('Escape');
    await page.keyboard.press('F1');
    await page.locator('.quick-input-widget').waitFor({ state: 'visible', timeout: 15_000 });
    await page.keyboard.type('noisewise: Show Rule Page');
    await until('the command in the palette', async () => (await page.locator('.quick-input-list .monaco-list-row', { hasText: 'Show Rule Page' }).count()) > 0, 20_000);
    await page.keyboard.press('Enter');
    await until('the rule list', async () => (await page.locator('.quick-input-list .monaco-list-row', { hasText: 'logit-space-average' }).count()) > 0, 20_000);
    await page.keyboard.type('unconstrained-std');
    await until('the rule in the list', async () => (await page.locator('.quick-input-list .monaco-list-row', { hasText: 'unconstrained-std' }).count()) > 0, 20_000);
    await page.keyboard.press('Enter');
    await page.getByRole('tab', { name: /Preview unconstrained-std\.md/ }).first().waitFor({ state: 'visible', timeout: 30_000 });
    // The preview is a webview (nested frames); wait until one of its frames shows the page's heading.
    const heading = await until(
      'the rule page in the Markdown preview',
      async () => {
        for (const frame of page.frames()) {
          const text = await frame.locator('body').innerText({ timeout: 500 }).catch(() => '');
          if (text.includes('What it catches')) return text;
        }
        return null;
      },
      30_000,
    );
    expect(heading).toContain('unconstrained-std: Trainable standard deviation without a positivity transform');
    await shot('rule-page');
  });

  it('opens the demo notebook and shows its cell finding in the Problems panel', async () => {
    await openFile('stage_forecast.ipynb');
    await until('the notebook cells to render', async () => (await page.locator('.monaco-list-row.code-cell-row').count()) > 0, 30_000);
    await shot('notebook-open');
    const rows = await until(
      'the notebook finding in the Problems panel',
      async () => {
        const all = await problems();
        return all.some((r) => r.includes('`noise_std` is trainable')) ? all : null;
      },
      90_000,
    ).catch((error: Error) => {
      throw new Error(`${error.message}\n${serverLog()}`);
    });
    await shot('notebook-problems');
    const row = rows.find((r) => r.includes('`noise_std` is trainable'))!;
    expect(row).toContain('unconstrained-std');
    // The diagnostic is on the training cell, at the scale argument of Normal (line 7 of that cell).
    expect(row).toMatch(/Ln 7, Col 29/);
  });
});
