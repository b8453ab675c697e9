import { type ChildProcess, spawn } from 'node:child_process';
import { once } from 'node:events';

// `plumbline serve` in a process of its own, from the sources, for tests of the real process:
// signals, exit codes, what it prints.

export interface Child {
  proc: ChildProcess;
  url: Promise<string>;
  lines: () => Array<Record<string, unknown>>;
  /** Everything written to standard error so far. */
  stderr: () => string;
  exit: Promise<[number | null, string | null]>;
}

export function serve(args: string[], env: NodeJS.ProcessEnv = process.env): Child {
  const proc = spawn(process.execPath, ['--import', 'tsx', 'src/cli/main.ts', 'serve', '--port', '0', ...args], { stdio: ['ignore', 'pipe', 'pipe'], env });
  let out = '';
  let err = '';
  proc.stderr!.on('data', (c: Buffer) => (err += c.toString()));
  const url = new Promise<string>((resolve, reject) => {
    proc.stdout!.on('data', (c: Buffer) => {
      out += c.toString();
      const m = /Server listening at (http:\/\/127\.0\.0\.1:\d+)/.exec(out);
      if (m) resolve(m[1] as string);
    });
    proc.on('exit', () => reject(new Error(`exited before listening: ${err || out}`)));
  });
  url.catch(() => undefined);
  const parsed = (): Array<Record<string, unknown>> =>
    `${out}${err}`
      .split('\n')
      .filter((l) => l.startsWith('{'))
      .map((l) => JSON.parse(l) as Record<string, unknown>);
  return { proc, url, lines: parsed, stderr: () => err, exit: once(proc, 'exit') as Promise<[number | null, string | null]> };
}

export async function waitFor(check: () => boolean, ms = 10_000): Promise<void> {
  const until = Date.now() + ms;
  while (!check()) {
    if (Date.now() > until) throw new Error('timed out');
    await new Promise((r) => setTimeout(r, 25));
  }
}

