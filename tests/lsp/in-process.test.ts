// The server in-process, connected to a client through paired streams: a rule that crashes (registered for this
// test) or an engine failure on one file never stops the server — the file gets one explanatory diagnostic and every
// other file and request is still served.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { PassThrough } from 'node:stream';
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import { createConnection } from 'vscode-languageserver/node';
import {
  createProtocolConnection,
  type ProtocolConnection,
  type PublishDiagnosticsParams,
  StreamMessageReader,
  StreamMessageWriter,
} from 'vscode-languageserver-protocol/node';
import { allRules, type RegisteredRule } from '../../rules/index';
import { defineRule } from '../../server/src/engine/api';
import { NoisewiseServer } from '../../server/src/lsp/server';
import { editorCapabilities, uriOf } from './lsp-client';
import { unconstrainedStdModule } from '../helpers/snippets';

// Files whose path contains this marker make checkFile itself throw (an engine failure outside any rule).
const ENGINE_FAILURE_MARKER = 'engine-failure';

vi.mock('../../server/src/engine/check', async (importOriginal) => {
  const original = await importOriginal<typeof import('../../server/src/engine/check')>();
  return {
    ...original,
    checkFile: (...args: Parameters<typeof original.checkFile>) => {
      if (String(args[1]).includes(ENGINE_FAILURE_MARKER)) throw new Error('simulated failure while building the semantic model');
      return original.checkFile(...args);
    },
  };
});

const crashingRule: RegisteredRule = {
  ...defineRule({
    meta: {
      id: 'crash-test',
      title: 'A rule that throws on every call, registered only by this test',
      family: 'evaluation',
      defaultSeverity: 'warning',
      status: { stage: 'experimental', since: '0.1.0' },
      fix: 'none',
      messages: { never: 'never reported' },
      settings: [],
    },
    create: () => ({
      call() {
        throw new RangeError('boom inside a rule listener');
      },
    }),
  }),
  doc: '# crash-test: A rule that throws on every call, registered only by this test\n',
};

const FLAGGED = unconstrainedStdModule('GaugeLayer');

describe('the server in-process over paired streams', () => {
  let client: ProtocolConnection;
  const pushed: PublishDiagnosticsParams[] = [];
  const waitFor = async (uri: string): Promise<PublishDiagnosticsParams> => {
    for (let i = 0; i < 300; i++) {
      const found = pushed.find((p) => p.uri === uri);
      if (found) return found;
      await new Promise((r) => setTimeout(r, 20));
    }
    throw new Error(`no diagnostics for ${uri}`);
  };

  beforeAll(async () => {
    // Rule pages are written to the cache folder; keep them out of the real home folder.
    process.env.XDG_CACHE_HOME = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-in-process-'));
    allRules.push(crashingRule);
    const toServer = new PassThrough();
    const toClient = new PassThrough();
    const serverConnection = createConnection(new StreamMessageReader(toServer), new StreamMessageWriter(toClient));
    new NoisewiseServer(serverConnection);
    serverConnection.listen();
    client = createProtocolConnection(new StreamMessageReader(toClient), new StreamMessageWriter(toServer));
    client.onNotification('textDocument/publishDiagnostics', (p: PublishDiagnosticsParams) => void pushed.push(p));
    client.onRequest('workspace/configuration', (p: { items: unknown[] }) => p.items.map(() => ({})));
    client.onRequest('client/registerCapability', () => null);
    client.onRequest('window/workDoneProgress/create', () => null);
    client.listen();
    await client.sendRequest('initialize', { processId: null, rootUri: null, workspaceFolders: null, capabilities: editorCapabilities() });
    await client.sendNotification('initialized', {});
  });

  afterAll(() => {
    allRules.splice(allRules.indexOf(crashingRule), 1);
    client?.dispose();
  });

  it('contains a crashing rule: one internal-error diagnostic for it, the other rules still report', async () => {
    const uri = uriOf(path.resolve('/virtual/gauge.py'));
    await client.sendNotification('textDocument/didOpen', { textDocument: { uri, languageId: 'python', version: 1, text: FLAGGED } });
    const published = await waitFor(uri);
    const crash = published.diagnostics.filter((d) => d.code === 'crash-test');
    expect(crash).toHaveLength(1);
    expect(crash[0]!.message).toContain('boom inside a rule listener');
    expect(published.diagnostics.some((d) => d.code === 'unconstrained-std')).toBe(true);
  });

  it('contains an engine failure on one file and keeps serving the others', async () => {
    const broken = uriOf(path.resolve(`/virtual/${ENGINE_FAILURE_MARKER}.py`));
    await client.sendNotification('textDocument/didOpen', { textDocument: { uri: broken, languageId: 'python', version: 1, text: FLAGGED } });
    const published = await waitFor(broken);
    expect(published.diagnostics).toHaveLength(1);
    expect(published.diagnostics[0]!.message).toContain('noisewise could not analyse this file (simulated failure while building the semantic model)');
    expect(published.diagnostics[0]!.range).toEqual({ start: { line: 0, character: 0 }, end: { line: 0, character: 0 } });
    const other = uriOf(path.resolve('/virtual/other.py'));
    await client.sendNotification('textDocument/didOpen', { textDocument: { uri: other, languageId: 'python', version: 1, text: FLAGGED } });
    expect((await waitFor(other)).diagnostics.some((d) => d.code === 'unconstrained-std')).toBe(true);
    const hover = await client.sendRequest('textDocument/hover', { textDocument: { uri: other }, position: { line: 10, character: 20 } });
    expect(hover).not.toBeNull();
  });
});
