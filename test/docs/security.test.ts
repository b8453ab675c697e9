import { copyFileSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { pino } from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { configSchema } from '../../src/config/config.js';
import { startServer } from '../../src/http/server.js';
import { tempDir } from '../helpers/datasets.js';
import { DEMO_DIR } from '../helpers/demo.js';
import { carry, dumpOutput, examplesOf, fencedBlocks, quoteProblems, readDoc, runCommand } from '../helpers/doc-examples.js';

// docs/security.md: creating a key, and verifying the audit log and a backup of it against a
// recorded head, run as written on a temporary log of seven answers. Keys, ids and chain hashes
// change from run to run; a hash the doc shows twice must be the same hash both times.

const DOC = readDoc('docs/security.md');
const tmp = tempDir('plumbline-doc-security-');
const DB = tmp.file('plumbline.db');
const BACKUP = tmp.file('backup.db');
const seen = new Map<string, string>();
const VARYING = [/plk_[A-Za-z0-9_-]{43}/, /\b[0-9a-f]{64}\b/, /\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z/];
const toReal = (s: string) => s.replaceAll('var/plumbline.db', DB).replaceAll('/backups/plumbline-2026-12-02.db', BACKUP);
const toDoc = (s: string) => s.replaceAll(DB, 'var/plumbline.db').replaceAll(BACKUP, '/backups/plumbline-2026-12-02.db');

beforeAll(async () => {
  // Seven answers in the log, scored on a server without keys (the key is made by the first example).
  const server = await startServer(configSchema.parse({ port: 0, models_dir: join(DEMO_DIR, 'models'), db: DB, logger: { level: 'silent' }, reports: { schedule: 'off' } }), { logger: pino({ level: 'silent' }), timers: false });
  for (const r of readFileSync(join(DEMO_DIR, 'traffic-normal.csv'), 'utf8').trim().split('\n').slice(1, 8)) {
    const res = await fetch(`${server.url}/v1/models/moulding-quality/score`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ features: r.split(',').slice(1, 11).map(Number) }) });
    expect(res.status).toBe(200);
  }
  await server.close();
}, 60_000);
afterAll(() => tmp.remove());

describe('docs/security.md', () => {
  it('records the head audit verify prints for a log of seven answers', async () => {
    const block = fencedBlocks(DOC).find((b) => b.body.startsWith('intact: 7 rows'));
    const run = await runCommand(`npx tsx src/cli/main.ts audit verify --db ${DB}`);
    const problems = quoteProblems(toDoc(run.output), block?.body ?? '', { seen, varyingText: VARYING });
    expect(problems, problems.join('\n')).toEqual([]);
    copyFileSync(DB, BACKUP);
  });

  for (const e of examplesOf(DOC)) {
    it(`line ${e.line}: ${e.command.split('\n')[0]?.slice(0, 100)}`, async () => {
      const run = await runCommand(toReal(carry(e.command, seen)));
      const output = toDoc(run.output);
      dumpOutput('security.md', e, output);
      const problems = quoteProblems(output, e.output, { seen, varyingText: VARYING });
      expect(problems, problems.join('\n')).toEqual([]);
      expect(run.code).toBe(0);
    });
  }
});
