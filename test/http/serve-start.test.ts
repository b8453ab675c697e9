import { accessSync, chmodSync, constants } from 'node:fs';
import { fileURLToPath } from 'node:url';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { openStore } from '../../src/store/store.js';
import { tempDir } from '../helpers/datasets.js';
import { serve } from '../helpers/serve-process.js';
import { immutableUnsupported, setImmutable } from '../helpers/storage-faults.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const MODELS = fileURLToPath(new URL('../../demo-data/models', import.meta.url));
const ENV = { ...process.env, PLUMBLINE_REPORTS_SCHEDULE: 'off' };
const SHOT = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93];

/** A migrated database, closed. */
function makeDatabase(name: string): string {
  const file = tmp.file(name);
  openStore(file, { sync: 'normal', flushMs: 0, flushRows: 1, queueRows: 1, rejectedRows: 1 }).close();
  return file;
}

/**
 * Makes `file` unwritable by whatever this machine allows: chmod for a user without root (root
 * writes through modes), chattr +i for root. Returns how to undo it, or why it cannot be done.
 */
function makeUnwritable(file: string): (() => void) | string {
  chmodSync(file, 0o444);
  try {
    accessSync(file, constants.W_OK);
  } catch {
    return () => chmodSync(file, 0o644);
  }
  chmodSync(file, 0o644);
  const why = immutableUnsupported(tmp.dir);
  if (why !== null) return why;
  setImmutable([file], true);
  return () => setImmutable([file], false);
}

describe('plumbline serve on a database it cannot write', () => {
  const file = makeDatabase('readonly.db');
  const undo = makeUnwritable(file);
  it.skipIf(typeof undo === 'string')(`says what is wrong and what to do in one line, and exits 73${typeof undo === 'string' ? ` (skipped: ${undo})` : ''}`, async () => {
    try {
      const child = serve(['--models', MODELS, '--db', file], ENV);
      const [code] = await child.exit;
      const stderr = child.stderr();
      expect(code, stderr).toBe(73);
      expect(stderr).toMatch(/^plumbline: cannot write the audit log .*readonly\.db: .*(readonly|read-only|READONLY).*not immutable \(lsattr\).*\n$/);
      // one line, no stack trace
      expect(stderr.trim().split('\n')).toHaveLength(1);
      expect(stderr).not.toMatch(/\n\s+at /);
    } finally {
      (undo as () => void)();
    }
  });
});

describe('two servers on one SQLite file', () => {
  it('refuses the second with a message naming the first, exit 75, and lets another take over once the first is killed', async () => {
    const db = tmp.file('shared.db');
    const post = (url: string) => fetch(`${url}/v1/models/moulding-quality/score`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ features: SHOT }) });
    const first = serve(['--models', MODELS, '--db', db], ENV);
    const children = [first];
    try {
      const url = await first.url;
      const second = serve(['--models', MODELS, '--db', db], ENV);
      children.push(second);
      // A second server that starts (the old behaviour) would never exit: its url settles first.
      const outcome = await Promise.race([second.exit.then(([c]) => c), second.url.then(
        () => 'listening',
        () => new Promise<never>(() => undefined),
      )]);
      expect(outcome, second.stderr()).toBe(75);
      expect(second.stderr()).toMatch(new RegExp(`^plumbline: .*shared\\.db is already served by plumbline \\S+ \\(pid ${first.proc.pid} on .*, since \\d{4}-.*\\)\\..*nightly reports.*alert deliveries.*\\n$`));
      // the first is untouched
      expect((await post(url)).status).toBe(200);

      // kill -9: no clean shutdown, nothing released by hand; the lock dies with the process
      first.proc.kill('SIGKILL');
      await first.exit;
      const third = serve(['--models', MODELS, '--db', db], ENV);
      children.push(third);
      expect((await post(await third.url)).status).toBe(200);
      const check = new BetterSqlite3(db, { readonly: true });
      expect(check.prepare('SELECT pid FROM serving_process').get()).toEqual({ pid: third.proc.pid });
      check.close();
      third.proc.kill('SIGTERM');
      expect((await third.exit)[0]).toBe(0);
    } finally {
      for (const c of children) if (c.proc.exitCode === null && c.proc.signalCode === null) c.proc.kill('SIGKILL');
    }
  });
});
