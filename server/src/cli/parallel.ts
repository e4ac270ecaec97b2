// Checks a workspace with worker threads: each worker holds every file's text (and so the import graph, which is read
// from the texts without parsing), computes the per-file summaries of its own share and hands them to the others
// (so no worker analyses every file just to read its summary), then runs the rules on its share; cross-file
// questions parse other files lazily inside the worker that asks.
import * as os from 'node:os';
import { isMainThread, parentPort, Worker, workerData } from 'node:worker_threads';
import { DEFAULT_FILE_BUDGET_MS } from '../engine/budget';
import { checkFile, checkSources, getParser, summaryKinds } from '../engine/check';
import { prepareSummaries } from '../engine/summaries';
import type { CheckInput, EngineSettings, FileReport, RuleSelection } from '../engine/types';
import { readNotebook } from '../parse/notebook';
import { Workspace } from '../semantic/workspace';

/** Options of a parallel check (those of the engine's `checkSources`, plus the number of workers). */
export interface ParallelCheckOptions {
  workspaceRoot: string;
  settingsFor(absPath: string): EngineSettings;
  rules?: RuleSelection;
  /** Worker threads: null = one per core, up to MAX_DEFAULT_JOBS. */
  jobs?: number | null;
  /** The per-rule analysis budget of each file (see engine/budget.ts). */
  budgetMs?: number;
}

/** The most workers used when the user does not say. */
export const MAX_DEFAULT_JOBS = 8;
/** Below this much text, starting workers costs more than it saves. */
const MIN_PARALLEL_CHARS = 400_000;

const WORKER_TAG = 'noisewise-check-worker';

interface InitMessage {
  type: 'init';
  inputs: CheckInput[];
  settings: EngineSettings[];
  share: number[];
  workspaceRoot: string;
  rules: RuleSelection | undefined;
  budgetMs: number | undefined;
}
type SummaryEntries = [string, [string, unknown][]][];
interface SummariesMessage {
  type: 'summaries';
  summaries: SummaryEntries;
}
type WorkerReply = { type: 'summaries'; summaries: SummaryEntries } | { type: 'reports'; reports: [number, FileReport][] } | { type: 'error'; message: string };

/** The number of workers a check would use. */
export function effectiveJobs(jobs: number | null | undefined, inputs: readonly CheckInput[]): number {
  const requested = jobs ?? Math.min(MAX_DEFAULT_JOBS, typeof os.availableParallelism === 'function' ? os.availableParallelism() : os.cpus().length);
  if (requested <= 1 || inputs.length < 2) return 1;
  if (jobs == null && inputs.reduce((n, i) => n + i.text.length, 0) < MIN_PARALLEL_CHARS) return 1;
  return Math.min(requested, inputs.length);
}

/**
 * Splits files into shares of similar total size, keeping neighbouring paths together (files of one package tend to
 * import each other, so a worker that checks them parses fewer files of other shares).
 */
export function shareFiles(inputs: readonly CheckInput[], jobs: number): number[][] {
  const order = inputs.map((_, i) => i).sort((a, b) => (inputs[a]!.absPath < inputs[b]!.absPath ? -1 : inputs[a]!.absPath > inputs[b]!.absPath ? 1 : 0));
  const total = inputs.reduce((n, i) => n + i.text.length + 1, 0);
  const shares: number[][] = Array.from({ length: jobs }, () => []);
  let share = 0;
  let filled = 0;
  for (const index of order) {
    const size = inputs[index]!.text.length + 1;
    if (share < jobs - 1 && filled > 0 && filled + size / 2 > (total * (share + 1)) / jobs) share++;
    shares[share]!.push(index);
    filled += size;
  }
  return shares.filter((s) => s.length > 0);
}

/** Checks sources with worker threads when it pays off, else in this thread; reports come back in input order. */
export async function checkSourcesInParallel(inputs: CheckInput[], options: ParallelCheckOptions): Promise<FileReport[]> {
  const jobs = effectiveJobs(options.jobs, inputs);
  if (jobs <= 1) return checkSources(inputs, options);
  const shares = shareFiles(inputs, jobs);
  const settings = inputs.map((i) => options.settingsFor(i.absPath));
  const reports: (FileReport | undefined)[] = new Array(inputs.length);
  const workers = shares.map(() => new Worker(__filename, { workerData: { tag: WORKER_TAG } }));
  try {
    const replies = workers.map((worker) => queue(worker));
    shares.forEach((share, w) => {
      const message: InitMessage = { type: 'init', inputs, settings, share, workspaceRoot: options.workspaceRoot, rules: options.rules, budgetMs: options.budgetMs };
      workers[w]!.postMessage(message);
    });
    // Phase 1: every worker computes the summaries of its share; each gets everybody's.
    const summaries: SummaryEntries = [];
    for (const reply of replies) {
      const message = await reply.next();
      if (message.type !== 'summaries') throw new Error(message.type === 'error' ? message.message : 'a check worker answered out of order');
      summaries.push(...message.summaries);
    }
    const summariesMessage: SummariesMessage = { type: 'summaries', summaries };
    for (const worker of workers) worker.postMessage(summariesMessage);
    // Phase 2: every worker checks its share.
    for (const reply of replies) {
      const message = await reply.next();
      if (message.type !== 'reports') throw new Error(message.type === 'error' ? message.message : 'a check worker answered out of order');
      for (const [index, report] of message.reports) {
        // Notebook models travel without their parsed JSON (see the worker); read them again from the same text.
        if (report.kind === 'notebook' && report.notebook === null) report.notebook = notebookOf(inputs[index]!.text);
        reports[index] = report;
      }
    }
  } finally {
    await Promise.all(workers.map((w) => w.terminate()));
  }
  return reports.map((r, i) => {
    if (!r) throw new Error(`no report for ${inputs[i]!.path}`);
    return r;
  });
}

/** The notebook model of a text, or null when it is not a readable notebook (the report's note says why). */
function notebookOf(text: string): FileReport['notebook'] {
  try {
    return readNotebook(text);
  } catch {
    return null;
  }
}

/** Messages from one worker, awaited one at a time; an exit or error before the next message rejects it. */
function queue(worker: Worker): { next(): Promise<WorkerReply> } {
  const pending: WorkerReply[] = [];
  const waiting: { resolve(m: WorkerReply): void; reject(e: Error): void }[] = [];
  let failure: Error | null = null;
  const fail = (error: Error) => {
    failure ??= error;
    for (const w of waiting.splice(0)) w.reject(failure);
  };
  worker.on('message', (m: WorkerReply) => {
    const w = waiting.shift();
    if (w) w.resolve(m);
    else pending.push(m);
  });
  worker.on('error', (e) => fail(e instanceof Error ? e : new Error(String(e))));
  worker.on('exit', (code) => fail(new Error(`a check worker stopped (exit code ${code})`)));
  return {
    next() {
      const m = pending.shift();
      if (m) return Promise.resolve(m);
      if (failure) return Promise.reject(failure);
      return new Promise((resolve, reject) => waiting.push({ resolve, reject }));
    },
  };
}

/** True in a thread started by checkSourcesInParallel. */
export function isCheckWorker(): boolean {
  return !isMainThread && (workerData as { tag?: string } | null)?.tag === WORKER_TAG;
}

/** The body of a check worker: index every file, summarise the share, take the others' summaries, check the share. */
export function runCheckWorker(): void {
  const port = parentPort!;
  let workspace: Workspace | null = null;
  let init: InitMessage | null = null;
  port.on('message', (message: InitMessage | SummariesMessage) => {
    void (async () => {
      try {
        if (message.type === 'init') {
          init = message;
          const parser = await getParser();
          workspace = new Workspace(message.workspaceRoot, () => parser);
          for (const input of message.inputs) workspace.setFile(input);
          const share = message.share.map((index) => message.inputs[index]!.absPath);
          prepareSummaries(workspace, share, summaryKinds(message.rules), message.budgetMs ?? DEFAULT_FILE_BUDGET_MS);
          port.postMessage({ type: 'summaries', summaries: workspace.exportSummaries(share) } satisfies WorkerReply);
          return;
        }
        if (!workspace || !init) throw new Error('a check worker got summaries before its files');
        workspace.importSummaries(message.summaries);
        const current: InitMessage = init;
        const ws: Workspace = workspace;
        // A notebook's model holds its whole parsed JSON, which may nest deeper than a message can be cloned (deep
        // outputs); the main thread reads it again from the text it already has.
        const reports: [number, FileReport][] = current.share.map((index) => {
          const report = checkFile(ws, current.inputs[index]!.absPath, current.settings[index]!, current.rules, { budgetMs: current.budgetMs });
          return [index, report.kind === 'notebook' ? { ...report, notebook: null } : report];
        });
        port.postMessage({ type: 'reports', reports } satisfies WorkerReply);
      } catch (error) {
        port.postMessage({ type: 'error', message: (error as Error)?.stack ?? String(error) } satisfies WorkerReply);
      }
    })();
  });
}
