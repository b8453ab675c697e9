import { type ChildProcess, spawn } from 'node:child_process';
import { once } from 'node:events';
import { fileURLToPath } from 'node:url';
import { buildService } from './build.js';

/** Runs a TypeScript script of bench/ in its own Node process and waits for its first JSON line. */
export async function startChild<T>(script: string, args: string[]): Promise<{ child: ChildProcess; info: T; stop(): Promise<void> }> {
  // The service as it is served: compiled (bench/http-server.ts loads it from dist/).
  if (script === 'http-server.ts') buildService();
  const child = spawn(process.execPath, ['--import', 'tsx', fileURLToPath(new URL(`../${script}`, import.meta.url)), ...args], { stdio: ['ignore', 'pipe', 'inherit'] });
  let out = '';
  for await (const chunk of child.stdout as AsyncIterable<Buffer>) {
    out += chunk.toString();
    const line = out.split('\n').find((l) => l.startsWith('{'));
    if (line) {
      return {
        child,
        info: JSON.parse(line) as T,
        stop: async () => {
          if (child.exitCode !== null) return;
          child.kill('SIGTERM');
          await once(child, 'exit');
        },
      };
    }
  }
  throw new Error(`${script} exited before it was ready`);
}
