import { execFile } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { configSchema } from '../src/config/config.js';
import { type RunningServer, startServer } from '../src/http/server.js';
import { tempDir } from './helpers/datasets.js';

const run = promisify(execFile);
const readme = readFileSync(new URL('../README.md', import.meta.url), 'utf8');
const tmp = tempDir();
let server: RunningServer;

beforeAll(async () => {
  const config = configSchema.parse({ port: 0, models_dir: new URL('../demo-data/models', import.meta.url).pathname, db: join(tmp.dir, 'readme.db'), logger: { level: 'silent' } });
  server = await startServer(config);
});
afterAll(async () => {
  await server.close();
  tmp.remove();
});

/** The ```sh blocks of the README that call curl, as written. */
function curlBlocks(): string[] {
  return [...readme.matchAll(/```sh\n([\s\S]*?)```/g)].map((m) => m[1] as string).filter((b) => b.trimStart().startsWith('curl'));
}

describe('README', () => {
  it('opens with one paragraph stating the job, then the quick start with the two set-up commands', () => {
    const [, intro, rest] = /^# plumbline\n\n([\s\S]*?)\n\n(## Quick start[\s\S]*)$/.exec(readme) ?? [];
    expect(intro).toMatch(/classifiers/);
    expect(intro).not.toContain('\n\n');
    expect(rest).toContain('npm ci && npm start');
    expect(rest).toContain('npm ci && npm test');
    expect(readme).toMatch(/decision support, not a safety function/);
  });

  it('has curl examples that work as written against the demo model (run here with real curl)', async () => {
    const blocks = curlBlocks();
    expect(blocks).toHaveLength(1);
    const script = (blocks[0] as string).replaceAll('http://127.0.0.1:8080', server.url);
    const { stdout } = await run('sh', ['-ec', script]);
    expect(stdout).toContain('"name":"moulding-quality"');
    expect(stdout).toContain('"label":"good"');
    expect(stdout).toContain('"feature":"cushion_mm","value":0');
    expect(stdout).toContain('"in_domain":false');
    expect(stdout).toContain('"items":[');
  });

  it('shows the answer the demo model gives to the example shot', async () => {
    const res = await fetch(`${server.url}/v1/models/moulding-quality/score`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ features: [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93] }),
    });
    const body = (await res.json()) as { label: string; margin: number; model: { sha256: string }; probabilities: Record<string, number> };
    expect(readme).toContain(`"sha256": "${body.model.sha256.slice(0, 8)}..."`);
    expect(readme).toContain(`"label": "${body.label}"`);
    expect(readme).toContain(`"margin": ${body.margin.toFixed(4)}`);
    expect(readme).toContain(`"good": ${body.probabilities.good?.toFixed(4)}`);
  });
});
