import type { Writable } from 'node:stream';

/** Where a command writes: injected so that tests can read what a user would see. */
export interface CliIo {
  stdout: Writable;
  stderr: Writable;
  /** stderr is a terminal: draw progress bars instead of progress lines. */
  interactive: boolean;
}

export function processIo(): CliIo {
  return { stdout: process.stdout, stderr: process.stderr, interactive: Boolean(process.stderr.isTTY) };
}

/** An error meant for the person at the terminal: printed without a stack, with an exit code. */
export class UsageError extends Error {
  constructor(
    message: string,
    readonly exitCode = 2,
  ) {
    super(message);
    this.name = 'UsageError';
  }
}

/** A file the user named cannot be opened: say which flag, which file and why, without a stack. */
export function fileProblem(flag: string, path: string, err: unknown): Error {
  const code = (err as NodeJS.ErrnoException).code;
  if (code && /^E[A-Z]+$/.test(code)) return new UsageError(`${flag} ${path}: cannot be written (${code})`);
  return err as Error;
}
