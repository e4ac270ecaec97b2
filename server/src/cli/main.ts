// Entry point of the bundle (server/dist/noisewise.js): wires the real engine and rule registry into the CLI and sets the exit code.
import { allRules } from '../../../rules/index';
import { runServerCommand } from '../lsp/server';
import { processIo } from './io';
import { checkSourcesInParallel, isCheckWorker, runCheckWorker } from './parallel';
import { runCli } from './run';

// `noisewise server --stdio` (the language server) is dispatched here, before the CLI's argument parser, because
// from then on standard output belongs to the protocol; the help lists it with the other commands (cli/args.ts).

// A reader that closes the pipe early (`noisewise check | head`) is not an error.
process.stdout.on('error', (error: NodeJS.ErrnoException) => {
  if (error.code === 'EPIPE') process.exit(process.exitCode ?? 0);
  throw error;
});

if (isCheckWorker()) runCheckWorker();
else if (process.argv[2] === 'server') runServerCommand(process.argv.slice(3));
else
  void runCli(process.argv.slice(2), processIo(), { rules: allRules, checkSources: checkSourcesInParallel }).then(
  (code) => {
    process.exitCode = code;
  },
  (error: unknown) => {
    process.stderr.write(`noisewise: internal error: ${(error as Error)?.stack ?? String(error)}\n`);
    process.exitCode = 2;
  },
);
