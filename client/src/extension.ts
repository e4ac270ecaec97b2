// The VS Code extension: starts the noisewise language server bundled beside it for Python files and notebooks, and
// adds two commands, one to show a rule page offline and one to check the whole workspace.
import * as fs from 'node:fs';
import * as path from 'node:path';
import * as vscode from 'vscode';
import { ExecuteCommandRequest, LanguageClient, type LanguageClientOptions, type ServerOptions, TransportKind } from 'vscode-languageclient/node';

/** The server's command that re-reads and re-checks the workspace folders (see server/src/lsp/server.ts). */
const SERVER_CHECK_WORKSPACE = 'noisewise.server.checkWorkspace';

let client: LanguageClient | undefined;

/** Starts the language server and registers the commands. */
export async function activate(context: vscode.ExtensionContext): Promise<void> {
  const serverModule = context.asAbsolutePath(path.join('dist', 'server.js'));
  const rulePagesDir = context.asAbsolutePath(path.join('dist', 'rules'));
  // The bundle is the `noisewise` command itself; `server` selects the language server and the client adds --stdio.
  const serverOptions: ServerOptions = {
    run: { module: serverModule, transport: TransportKind.stdio, args: ['server'] },
    debug: { module: serverModule, transport: TransportKind.stdio, args: ['server'], options: { execArgv: ['--nolazy', '--inspect=6019'] } },
  };
  // One log channel for the server's messages and, with `noisewise.trace.server`, the protocol trace.
  const outputChannel = vscode.window.createOutputChannel('noisewise', { log: true });
  const clientOptions: LanguageClientOptions = {
    documentSelector: [
      { scheme: 'file', language: 'python' },
      { scheme: 'untitled', language: 'python' },
      { scheme: 'vscode-notebook-cell', language: 'python' },
    ],
    outputChannel,
    traceOutputChannel: outputChannel,
    initializationOptions: { rulePagesDir },
  };
  client = new LanguageClient('noisewise', 'noisewise', serverOptions, clientOptions);
  context.subscriptions.push(
    outputChannel,
    vscode.commands.registerCommand('noisewise.showRulePage', (ruleId?: unknown) => showRulePage(rulePagesDir, typeof ruleId === 'string' ? ruleId : undefined)),
    vscode.commands.registerCommand('noisewise.checkWorkspace', () => checkWorkspace()),
  );
  await client.start();
}

/** Stops the language server. */
export async function deactivate(): Promise<void> {
  const running = client;
  client = undefined;
  if (running) await running.stop();
}

/** The rules whose pages ship with the extension: id and title from each page's first line (`# id: title`). */
function shippedRules(rulePagesDir: string): { id: string; title: string }[] {
  let files: string[];
  try {
    files = fs.readdirSync(rulePagesDir);
  } catch {
    return [];
  }
  return files
    .filter((f) => f.endsWith('.md') && f !== 'index.md')
    .sort()
    .map((f) => {
      const first = fs.readFileSync(path.join(rulePagesDir, f), 'utf8').split('\n', 1)[0] ?? '';
      const match = /^# [^:]+: (.*)$/.exec(first);
      return { id: f.slice(0, -3), title: match ? match[1]! : '' };
    });
}

/** Opens a rule page from the extension's own files in the Markdown preview (no network); asks which rule when none is given. */
async function showRulePage(rulePagesDir: string, ruleId: string | undefined): Promise<void> {
  let id = ruleId;
  if (!id) {
    const picked = await vscode.window.showQuickPick(
      shippedRules(rulePagesDir).map((r) => ({ label: r.id, description: r.title })),
      { placeHolder: 'Which noisewise rule?' },
    );
    id = picked?.label;
  }
  if (!id) return;
  const file = path.join(rulePagesDir, `${id}.md`);
  if (!fs.existsSync(file)) {
    void vscode.window.showErrorMessage(`noisewise: there is no rule "${id}".`);
    return;
  }
  const uri = vscode.Uri.file(file);
  try {
    await vscode.commands.executeCommand('markdown.showPreview', uri);
  } catch {
    await vscode.window.showTextDocument(uri, { preview: true });
  }
}

/** Asks the server to read and check every workspace folder again and reports the outcome. */
async function checkWorkspace(): Promise<void> {
  if (!client) return;
  const outcome = (await client.sendRequest(ExecuteCommandRequest.type, { command: SERVER_CHECK_WORKSPACE, arguments: [] })) as
    | { files: number; findings: number; cancelled: boolean }
    | undefined;
  if (!outcome) return;
  const what = `${outcome.files} file${outcome.files === 1 ? '' : 's'} checked, ${outcome.findings} finding${outcome.findings === 1 ? '' : 's'}`;
  void vscode.window.showInformationMessage(outcome.cancelled ? `noisewise: check cancelled (${what} so far).` : `noisewise: ${what}; see the Problems panel.`);
}
