// The process boundary of the CLI (working directory, environment, output streams), kept in one object so commands can be run and tested without a real terminal.

/** A writable stream as the CLI uses it. */
export interface CliStream {
  write(text: string): void;
  /** Whether the stream is an interactive terminal. */
  isTTY: boolean;
}

/** What a CLI command may touch of its process. */
export interface CliIo {
  cwd: string;
  env: Record<string, string | undefined>;
  stdout: CliStream;
  stderr: CliStream;
}

/** The real process: streams, environment and working directory of this Node process. */
export function processIo(): CliIo {
  return {
    cwd: process.cwd(),
    env: process.env,
    stdout: { write: (text) => void process.stdout.write(text), isTTY: Boolean(process.stdout.isTTY) },
    stderr: { write: (text) => void process.stderr.write(text), isTTY: Boolean(process.stderr.isTTY) },
  };
}

/** A usage mistake on the command line (exit code 2, with a pointer to `--help`). */
export class UsageError extends Error {
  override name = 'UsageError';
  constructor(
    message: string,
    /** The command whose help the user should read, when there is one. */
    readonly command?: string,
  ) {
    super(message);
  }
}

/** Exit codes of every command. */
export const EXIT = {
  /** Nothing at or above the fail level. */
  ok: 0,
  /** Findings at or above the fail level. */
  findings: 1,
  /** Usage, configuration or internal error. */
  error: 2,
} as const;
