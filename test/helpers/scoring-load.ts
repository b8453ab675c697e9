import { type ChildProcess, spawn } from 'node:child_process';
import { fileURLToPath } from 'node:url';

// The service in a process of its own (test/fixtures/serve-child.ts) and clients that keep scoring
// it, for the tests that kill it or pull its files away under load.

const CHILD = fileURLToPath(new URL('../fixtures/serve-child.ts', import.meta.url));
export const SHOT = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93];

export async function startChild(db: string, config: Record<string, unknown> = {}): Promise<{ child: ChildProcess; url: string }> {
  const child = spawn(process.execPath, ['--import', 'tsx', CHILD, db, JSON.stringify(config)], { stdio: ['ignore', 'pipe', 'inherit'] });
  let out = '';
  for await (const chunk of child.stdout as AsyncIterable<Buffer>) {
    out += chunk.toString();
    const line = out.split('\n').find((l) => l.startsWith('{'));
    if (line) return { child, url: (JSON.parse(line) as { url: string }).url };
  }
  throw new Error('the service exited before it listened');
}

/** Keeps `workers` clients scoring until stopped; returns the request ids answered 200. */
export function load(url: string, workers: number): { acknowledged: string[]; stop(): Promise<void> } {
  const acknowledged: string[] = [];
  let running = true;
  const one = async (w: number): Promise<void> => {
    for (let i = 0; running; i++) {
      try {
        const body = i % 5 === 0 ? { items: [{ features: SHOT }, { features: SHOT, tags: { w: String(w) } }] } : { features: SHOT, tags: { w: String(w), i: String(i) } };
        const res = await fetch(`${url}/v1/models/moulding-quality/${i % 5 === 0 ? 'score-batch' : 'score'}`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
        if (res.status !== 200) continue;
        const answer = (await res.json()) as { request_id?: string; items?: Array<{ request_id: string }> };
        // Only an answer read whole counts as acknowledged.
        if (answer.items) acknowledged.push(...answer.items.map((a) => a.request_id));
        else acknowledged.push(answer.request_id as string);
      } catch {
        return; // the connection died with the process
      }
    }
  };
  const all = Promise.all(Array.from({ length: workers }, (_, w) => one(w)));
  return {
    acknowledged,
    stop: async () => {
      running = false;
      await all;
    },
  };
}

