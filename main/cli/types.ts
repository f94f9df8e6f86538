/** The contract between the `plateau` front door and its commands (one file each in commands/). */

/** Where a command writes; injected so tests can run commands in-process. */
export interface CliIo {
  stdout(text: string): void;
  stderr(text: string): void;
  /** Directory that relative paths in arguments are resolved against. */
  cwd: string;
}

export interface CliCommand {
  /** The word after `plateau`. */
  name: string;
  /** One line for `plateau help`. */
  summary: string;
  /** Full usage text for `plateau <name> --help` and for argument errors. */
  usage: string;
  /** Runs the command; resolves to the process exit code (0 ok, 1 failure, 2 bad usage). */
  run(argv: string[], io: CliIo, signal?: AbortSignal): Promise<number>;
}

/** Thrown for wrong command-line usage; the runner prints the message and the usage, exit 2. */
export class UsageError extends Error {
  readonly usage?: string;
  constructor(message: string, usage?: string) {
    super(message);
    this.name = 'UsageError';
    if (usage !== undefined) this.usage = usage;
  }
}

/** Thrown for a failure the user can fix (a missing file, bad JSON); exit 1, message only. */
export class CliError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'CliError';
  }
}
