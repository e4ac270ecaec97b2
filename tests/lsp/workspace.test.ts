// The workspace as a whole: background indexing with $/progress (honouring .gitignore, skipping huge and binary
// files with a log line) and its cancellation, findings of dependent files refreshed when a file they import changes,
// watched files, request cancellation, pull diagnostics (document and workspace, with unchanged result ids) and the
// check-workspace command.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import type { DocumentDiagnosticReport, PublishDiagnosticsParams, WorkspaceDiagnosticReport } from 'vscode-languageserver-protocol';
import { copyToTemp, editorCapabilities, REPO, startSession, tempWorkspace, uriOf } from './lsp-client';

const RIVER_LAB = path.join(REPO, 'test-workspaces', 'river-lab');
const FLAGGED = fs.readFileSync(path.join(REPO, 'rules', 'unconstrained-std', 'cases', 'fix-basic.py'), 'utf8');
const STD_LINE = '        self.weight_std = nn.Parameter(torch.full((out_features, in_features), init_std))';

function stdFindings(p: PublishDiagnosticsParams | undefined): number {
  return p ? p.diagnostics.filter((d) => d.code === 'unconstrained-std').length : -1;
}

describe('background indexing', () => {
  it('checks every file on start with $/progress, pushing findings of files that are not open', async () => {
    const root = copyToTemp(RIVER_LAB);
    const session = await startSession({ root });
    try {
      const models = uriOf(path.join(root, 'riverlab', 'models.py'));
      const pushed = await session.waitFor('models.py findings without opening it', () => session.pushed.find((p) => p.uri === models && stdFindings(p) > 0));
      expect(pushed.version).toBeUndefined();
      expect(stdFindings(pushed)).toBe(2);
      await session.waitFor('progress end', () => session.progress.find((p) => p.value.kind === 'end'));
      const begin = session.progress.find((p) => p.value.kind === 'begin')!;
      expect(begin.value.cancellable).toBe(true);
      const reports = session.progress.filter((p) => p.value.kind === 'report');
      expect(reports.at(-1)!.value.message).toMatch(/^(\d+)\/\1 files$/);
      expect(reports.at(-1)!.value.percentage).toBe(100);
      const log = await session.waitFor('the indexing summary', () => session.logs.find((l) => l.message.startsWith('indexing (start-up) finished')));
      const total = fs.readdirSync(path.join(root, 'riverlab')).filter((f) => f.endsWith('.py')).length + 1;
      expect(log.message).toContain(`${total} of ${total} files checked`);
    } finally {
      await session.stop();
    }
  });

  it('honours .gitignore and exclude, and skips huge and binary files with a log message', async () => {
    const root = tempWorkspace({
      '.gitignore': 'scratch/\n',
      'pyproject.toml': '[tool.noisewise]\nexclude = ["legacy/**"]\n',
      'kept.py': FLAGGED,
      'scratch/ignored.py': FLAGGED,
      'legacy/old.py': FLAGGED,
    });
    fs.mkdirSync(path.join(root, '.git'));
    fs.writeFileSync(path.join(root, 'blob.py'), Buffer.from([0x69, 0x6d, 0x70, 0x00, 0x01, 0x02]));
    fs.writeFileSync(path.join(root, 'huge.py'), `${'x = 1\n'.repeat(2_000_000)}`);
    const session = await startSession({ root });
    try {
      await session.waitFor('the indexing summary', () => session.logs.find((l) => l.message.startsWith('indexing (start-up) finished')));
      await session.waitFor('kept.py findings', () => session.pushed.find((p) => p.uri === uriOf(path.join(root, 'kept.py')) && stdFindings(p) > 0));
      const uris = new Set(session.pushed.map((p) => p.uri));
      expect(uris.has(uriOf(path.join(root, 'scratch', 'ignored.py')))).toBe(false);
      expect(uris.has(uriOf(path.join(root, 'legacy', 'old.py')))).toBe(false);
      const logs = session.logs.map((l) => l.message).join('\n');
      expect(logs).toMatch(/blob\.py: skipped, binary file/);
      expect(logs).toMatch(/huge\.py: skipped, larger than 10 MB/);
      expect(logs).toContain('1 of 1 files checked');
    } finally {
      await session.stop();
    }
  });

  it('stops when the editor cancels the progress', async () => {
    const files: Record<string, string> = {};
    for (let i = 0; i < 300; i++) files[`gauges/station_${String(i).padStart(3, '0')}.py`] = FLAGGED;
    const root = tempWorkspace(files);
    const session = await startSession({ root });
    try {
      const first = await session.waitFor('a progress report', () => session.progress.find((p) => p.value.kind === 'report'));
      void session.connection.sendNotification('window/workDoneProgress/cancel', { token: first.token });
      const log = await session.waitFor('the indexing summary', () => session.logs.find((l) => l.message.startsWith('indexing (start-up)')));
      expect(log.message).toMatch(/^indexing \(start-up\) cancelled: \d+ of 300 files checked/);
      const checked = Number(/cancelled: (\d+) of/.exec(log.message)![1]);
      expect(checked).toBeLessThan(300);
      await session.waitFor('progress end', () => session.progress.find((p) => p.token === first.token && p.value.kind === 'end'));
      // The server still works: the check-workspace command runs the whole pass again.
      const outcome = (await session.connection.sendRequest('workspace/executeCommand', { command: 'noisewise.server.checkWorkspace', arguments: [] })) as { files: number; findings: number; cancelled: boolean };
      expect(outcome).toMatchObject({ files: 300, cancelled: false });
      expect(outcome.findings).toBeGreaterThanOrEqual(600);
    } finally {
      await session.stop();
    }
  });
});

describe('dependent files', () => {
  it('refreshes findings of files that import an edited file (open and closed)', async () => {
    const root = copyToTemp(RIVER_LAB);
    const session = await startSession({ root });
    try {
      const layersPath = path.join(root, 'riverlab', 'layers.py');
      const layers = uriOf(layersPath);
      const models = uriOf(path.join(root, 'riverlab', 'models.py'));
      await session.waitFor('models.py findings', () => session.pushed.find((p) => p.uri === models && stdFindings(p) === 2));
      const text = fs.readFileSync(layersPath, 'utf8');
      session.open(layers, text);
      await session.diagnosticsFor(layers, { version: 1 });
      const line = text.split('\n').indexOf(STD_LINE);
      expect(line).toBeGreaterThan(0);
      const since = session.pushed.length;
      // weight_std stops being trainable in the base class: the subclass in models.py is no longer flagged.
      session.change(layers, 2, [{ range: { start: { line, character: 0 }, end: { line, character: STD_LINE.length } }, text: '        self.weight_std = torch.full((out_features, in_features), init_std)' }]);
      const refreshed = await session.waitFor('models.py refreshed', () => session.pushed.slice(since).find((p) => p.uri === models));
      expect(stdFindings(refreshed)).toBe(0);
      // And back, with models.py open this time: its versioned diagnostics come back.
      session.open(models, fs.readFileSync(path.join(root, 'riverlab', 'models.py'), 'utf8'));
      await session.diagnosticsFor(models, { version: 1 });
      const since2 = session.pushed.length;
      session.change(layers, 3, [{ range: { start: { line, character: 0 }, end: { line, character: 1000 } }, text: STD_LINE }]);
      const back = await session.waitFor('models.py flagged again', () => session.pushed.slice(since2).find((p) => p.uri === models && stdFindings(p) === 2));
      expect(back.version).toBe(1);
    } finally {
      await session.stop();
    }
  });
});

describe('watched files', () => {
  it('picks up files created, changed and deleted on disk, and a changed pyproject.toml', async () => {
    const root = tempWorkspace({ 'kept.py': 'x = 1\n' });
    const session = await startSession({ root });
    try {
      await session.waitFor('the indexing summary', () => session.logs.find((l) => l.message.startsWith('indexing (start-up) finished')));
      const created = path.join(root, 'stage_layer.py');
      fs.writeFileSync(created, FLAGGED);
      void session.connection.sendNotification('workspace/didChangeWatchedFiles', { changes: [{ uri: uriOf(created), type: 1 }] });
      const first = await session.waitFor('the created file checked', () => session.pushed.find((p) => p.uri === uriOf(created) && stdFindings(p) > 0));
      expect(first.diagnostics.every((d) => d.severity === 2)).toBe(true);

      const since = session.pushed.length;
      fs.writeFileSync(path.join(root, 'pyproject.toml'), '[tool.noisewise]\nseverity = { unconstrained-std = "error" }\n');
      void session.connection.sendNotification('workspace/didChangeWatchedFiles', { changes: [{ uri: uriOf(path.join(root, 'pyproject.toml')), type: 1 }] });
      const severe = await session.waitFor('errors after the pyproject change', () => session.pushed.slice(since).find((p) => p.uri === uriOf(created) && stdFindings(p) > 0));
      expect(severe.diagnostics.every((d) => d.severity === 1)).toBe(true);

      const since2 = session.pushed.length;
      fs.writeFileSync(created, 'x = 2\n');
      void session.connection.sendNotification('workspace/didChangeWatchedFiles', { changes: [{ uri: uriOf(created), type: 2 }] });
      await session.waitFor('the changed file clean', () => session.pushed.slice(since2).find((p) => p.uri === uriOf(created) && p.diagnostics.length === 0));

      fs.writeFileSync(created, FLAGGED);
      void session.connection.sendNotification('workspace/didChangeWatchedFiles', { changes: [{ uri: uriOf(created), type: 2 }] });
      await session.waitFor('flagged again', () => stdFindings(session.latest(uriOf(created))) > 0);
      const since3 = session.pushed.length;
      fs.rmSync(created);
      void session.connection.sendNotification('workspace/didChangeWatchedFiles', { changes: [{ uri: uriOf(created), type: 3 }] });
      await session.waitFor('the deleted file cleared', () => session.pushed.slice(since3).find((p) => p.uri === uriOf(created) && p.diagnostics.length === 0));
    } finally {
      await session.stop();
    }
  });
});

describe('pull diagnostics', () => {
  it('serves document and workspace pulls with result ids, answering unchanged when nothing changed', async () => {
    const root = copyToTemp(RIVER_LAB);
    const session = await startSession({ root, capabilities: editorCapabilities({ pull: true }) });
    try {
      const modelsPath = path.join(root, 'riverlab', 'models.py');
      const models = uriOf(modelsPath);
      session.open(models, fs.readFileSync(modelsPath, 'utf8'));
      const full = (await session.connection.sendRequest('textDocument/diagnostic', { textDocument: { uri: models } })) as DocumentDiagnosticReport & { items: unknown[]; resultId: string };
      expect(full.kind).toBe('full');
      expect(full.items).toHaveLength(2);
      const same = (await session.connection.sendRequest('textDocument/diagnostic', { textDocument: { uri: models }, previousResultId: full.resultId })) as DocumentDiagnosticReport;
      expect(same).toEqual({ kind: 'unchanged', resultId: full.resultId });

      const workspace = (await session.connection.sendRequest('workspace/diagnostic', { previousResultIds: [] })) as WorkspaceDiagnosticReport;
      const layers = uriOf(path.join(root, 'riverlab', 'layers.py'));
      const layersReport = workspace.items.find((i) => i.uri === layers)!;
      expect(layersReport.kind).toBe('full');
      expect(workspace.items.some((i) => i.uri === models)).toBe(false); // open documents are pulled per document
      const again = (await session.connection.sendRequest('workspace/diagnostic', {
        previousResultIds: workspace.items.map((i) => ({ uri: i.uri, value: i.resultId! })),
      })) as WorkspaceDiagnosticReport;
      expect(again.items.every((i) => i.kind === 'unchanged')).toBe(true);
      expect(session.pushed).toEqual([]); // a pull client gets no pushes, so nothing is shown twice
    } finally {
      await session.stop();
    }
  });

  it('asks the client to pull again after a change it did not make (configuration)', async () => {
    const root = tempWorkspace({ 'a.py': FLAGGED });
    const session = await startSession({ root, capabilities: editorCapabilities({ pull: true }) });
    try {
      await session.waitFor('the indexing summary', () => session.logs.find((l) => l.message.startsWith('indexing (start-up) finished')));
      const before = session.refreshes.length;
      session.settings = { severity: { 'unconstrained-std': 'off' } };
      void session.connection.sendNotification('workspace/didChangeConfiguration', { settings: null });
      await session.waitFor('a refresh request', () => session.refreshes.length > before);
      // Another refresh (the end of indexing) may arrive first; pull until the new settings show, as a client
      // does on each refresh. A server that never applies them fails here.
      let items: unknown[] = [null];
      for (let attempt = 0; attempt < 50 && items.length > 0; attempt++) {
        const report = (await session.connection.sendRequest('textDocument/diagnostic', { textDocument: { uri: uriOf(path.join(root, 'a.py')) } })) as { items: unknown[] };
        items = report.items;
        if (items.length > 0) await new Promise((resolve) => setTimeout(resolve, 100));
      }
      expect(items).toEqual([]);
    } finally {
      await session.stop();
    }
  });

  it('cancels a workspace pull when the client cancels the request', async () => {
    const files: Record<string, string> = {};
    for (let i = 0; i < 200; i++) files[`gauges/station_${String(i).padStart(3, '0')}.py`] = FLAGGED;
    const root = tempWorkspace(files);
    const session = await startSession({ root, capabilities: editorCapabilities({ pull: true }) });
    try {
      // Pull while the server is still checking the workspace, so the pull has real work to do, and cancel it.
      await session.waitFor('indexing to start', () => session.progress.find((p) => p.value.kind === 'begin'));
      const { CancellationTokenSource } = await import('vscode-languageserver-protocol');
      const source = new CancellationTokenSource();
      const pending = session.connection.sendRequest('workspace/diagnostic', { previousResultIds: [] }, source.token);
      setTimeout(() => source.cancel(), 30);
      await expect(pending).rejects.toMatchObject({ code: -32800 });
      await session.waitFor('the indexing summary', () => session.logs.find((l) => l.message.startsWith('indexing (start-up) finished')));
      // The next pull completes.
      const report = (await session.connection.sendRequest('workspace/diagnostic', { previousResultIds: [] })) as WorkspaceDiagnosticReport;
      expect(report.items).toHaveLength(200);
    } finally {
      await session.stop();
    }
  });
});
