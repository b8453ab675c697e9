import { join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { describe, expect, it } from 'vitest';
import { SETOSA, type TestService, startTestService } from '../helpers/service.js';
import { immutableUnsupported, mountSmallDisk, setImmutable } from '../helpers/storage-faults.js';

// Readiness must follow whether the audit log can be written, so that a load balancer stops
// sending traffic to a node that cannot log and sends it again when it can (issue 19).

const score = (svc: TestService, items = 1) =>
  svc.app.inject({ method: 'POST', url: '/v1/models/iris/score-batch', payload: { items: Array.from({ length: items }, () => ({ features: SETOSA, tags: { line: '3' } })) } });

/** Asks /readyz until it gives `status` (it writes a probe at most once a second) or 10 s pass. */
async function readyzUntil(svc: TestService, status: number): Promise<{ statusCode: number; body: Record<string, unknown> }> {
  const deadline = Date.now() + 10_000;
  for (;;) {
    const res = await svc.app.inject('/readyz');
    if (res.statusCode === status || Date.now() > deadline) return { statusCode: res.statusCode, body: res.json() };
    await new Promise((r) => setTimeout(r, 200));
  }
}

describe('GET /readyz and the audit log', () => {
  it('is not ready while another process holds the write lock, and ready once it lets go', async () => {
    const svc = await startTestService();
    const other = new BetterSqlite3(svc.dbFile);
    try {
      other.exec('BEGIN IMMEDIATE');
      const busy = await svc.app.inject('/readyz');
      expect(busy.statusCode).toBe(503);
      expect(busy.json()).toMatchObject({ status: 'not ready', database: 'not writable' });
      other.exec('ROLLBACK');
      expect((await readyzUntil(svc, 200)).body).toMatchObject({ status: 'ready', database: 'writable' });
    } finally {
      other.close();
      await svc.close();
    }
  });

  const disk = mountSmallDisk(6 * 2 ** 20);
  it.skipIf(typeof disk === 'string')(`is not ready while a full disk fails every commit, and ready again once there is room${typeof disk === 'string' ? ` (skipped: ${disk})` : ''}`, async () => {
    const d = disk as Exclude<typeof disk, string>;
    const svc = await startTestService({ dbFile: join(d.dir, 'audit.db'), config: { log: { wal_max_bytes: 2 ** 20 } } });
    try {
      expect((await score(svc)).statusCode).toBe(200);
      expect((await svc.app.inject('/readyz')).statusCode).toBe(200);
      d.fill();
      // The WAL may still have room of its own for a while; batches soon need more.
      let refused = null;
      for (let i = 0; i < 200 && refused === null; i++) {
        const res = await score(svc, 200);
        if (res.statusCode !== 200) refused = res;
      }
      expect(refused?.statusCode).toBe(503);
      expect(refused?.json().type).toBe('urn:plumbline:problem:log-unavailable');
      const down = await svc.app.inject('/readyz');
      expect(down.statusCode).toBe(503);
      expect(down.json()).toMatchObject({ status: 'not ready', database: 'not writable', reason: expect.stringMatching(/full/i) });
      d.free();
      expect((await readyzUntil(svc, 200)).body).toMatchObject({ status: 'ready', database: 'writable' });
      expect((await score(svc)).statusCode).toBe(200);
    } finally {
      await svc.close();
      d.remove();
    }
  });

  const immutable = immutableUnsupported();
  it.skipIf(immutable !== null)(`is not ready while the database files are immutable, and ready again after${immutable !== null ? ` (skipped: ${immutable})` : ''}`, async () => {
    const svc = await startTestService();
    const files = [svc.dbFile, `${svc.dbFile}-wal`];
    try {
      expect((await score(svc)).statusCode).toBe(200);
      setImmutable(files, true);
      const refused = await score(svc);
      expect(refused.statusCode).toBe(503);
      expect(refused.json().type).toBe('urn:plumbline:problem:log-unavailable');
      const down = await svc.app.inject('/readyz');
      expect(down.statusCode).toBe(503);
      expect(down.json()).toMatchObject({ status: 'not ready', database: 'not writable' });
      setImmutable(files, false);
      expect((await readyzUntil(svc, 200)).body).toMatchObject({ status: 'ready', database: 'writable' });
      expect((await score(svc)).statusCode).toBe(200);
    } finally {
      setImmutable(files, false);
      await svc.close();
    }
  });

  it('is not ready after a failed commit even with no traffic since, on a test write of its own', async () => {
    const svc = await startTestService();
    const other = new BetterSqlite3(svc.dbFile);
    try {
      // The commit fails on the lock (busy for longer than the 250 ms busy timeout).
      other.exec('BEGIN IMMEDIATE');
      expect((await score(svc)).statusCode).toBe(503);
      other.exec('ROLLBACK');
      // The lock is free now, but the last commit failed: readiness writes before saying writable.
      const res = await svc.app.inject('/readyz');
      expect(res.json()).toMatchObject({ status: 'ready', database: 'writable' });
      expect(svc.rows('SELECT COUNT(*) AS n FROM write_probe')).toEqual([{ n: 1 }]);
    } finally {
      other.close();
      await svc.close();
    }
  });
});
