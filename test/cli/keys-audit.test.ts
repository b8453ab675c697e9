import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { auditVerifyAction, parseAnchor } from '../../src/cli/actions/audit.js';
import { createKeyAction, listKeysAction, revokeKeyAction } from '../../src/cli/actions/keys.js';
import type { CliIo } from '../../src/cli/io.js';
import { openStore } from '../../src/store/store.js';
import { tempDir } from '../helpers/datasets.js';
import { sink } from '../helpers/sink.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const io = () => {
  const out = sink();
  const err = sink();
  return { stdout: out, stderr: err, interactive: false, out, err } satisfies CliIo & Record<string, unknown>;
};
const MAIN = fileURLToPath(new URL('../../src/cli/main.ts', import.meta.url));
const cli = (...args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', MAIN, ...args], { encoding: 'utf8' });

describe('plumbline keys', () => {
  const db = tmp.file('keys.db');

  it('create prints the key once, as the last line of stdout, and stores only its hash', async () => {
    const t = io();
    const { id, key } = await createKeyAction({ db, role: 'scorer', label: 'line-3 app' }, t);
    const lines = t.out.text().trimEnd().split('\n');
    expect(lines.at(-1)).toBe(key);
    // "plk_" and 32 random bytes in base64url: 43 characters
    expect(key).toMatch(/^plk_[A-Za-z0-9_-]{43}$/);
    expect(t.err.text()).toContain(`created scorer key ${id} ("line-3 app")`);
    const raw = new BetterSqlite3(db, { readonly: true });
    const row = raw.prepare('SELECT * FROM api_keys').get() as Record<string, unknown>;
    raw.close();
    expect(JSON.stringify(row)).not.toContain(key.slice(10));
    expect(row).toMatchObject({ id, prefix: key.slice(0, 10), role: 'scorer', label: 'line-3 app', revoked_at: null });
  });

  it('list shows id, role, label and times, never the key; revoke stops it', async () => {
    const admin = await createKeyAction({ db, role: 'admin', label: 'ops' }, io());
    const t = io();
    const listed = await listKeysAction({ db, json: false }, t);
    expect(listed.map((k) => k.label)).toEqual(['line-3 app', 'ops']);
    expect(t.out.text().split('\n')[0]).toMatch(/^id +prefix +role +label +created +last used +revoked$/);
    expect(t.out.text()).not.toContain(admin.key);
    await revokeKeyAction({ db, id: admin.id }, io());
    const after = await listKeysAction({ db, json: true }, io());
    expect(after.find((k) => k.id === admin.id)?.revoked_at).not.toBeNull();
    await expect(revokeKeyAction({ db, id: admin.id }, io())).rejects.toThrow(/was revoked already/);
    await expect(revokeKeyAction({ db, id: 'nope' }, io())).rejects.toThrow(/no key has the id nope/);
  });

  it('refuses an empty label, an unknown role and a missing database, from the command line', async () => {
    await expect(createKeyAction({ db, role: 'reader', label: '  ' }, io())).rejects.toThrow(/--label must be 1 to 128 characters/);
    const bad = cli('keys', 'create', '--db', db, '--role', 'root', '--label', 'x');
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/--role <role>.*expected one of scorer, reader, admin/);
    const missing = cli('keys', 'list', '--db', tmp.file('none.db'));
    expect(missing.status).toBe(2);
    expect(missing.stderr).toMatch(/no such file/);
  });
});

describe('plumbline keys leaves the audit log alone', () => {
  it('keeps every refused-request record, and still revokes a key when the chain head is broken', async () => {
    const db = tmp.file('alone.db');
    const store = openStore(db, { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 1000, rejectedRows: 1000 });
    store.recordModel({ sha256: 'e'.repeat(64), name: 'm', version: '1', features: [{ name: 'a', unit: 'mm' }], classes: ['x', 'y'] });
    await store.log.append([{ requestId: 'q', batchId: null, receivedAt: 1_790_000_000_000, model: { sha256: 'e'.repeat(64), name: 'm', version: '1' }, features: [1], tags: null, label: 'x', probabilities: [0.6, 0.4], margin: 0.2, inDomain: true, review: false, domain: { checks: [], outside: [] }, latencyUs: 10 }]);
    for (let i = 0; i < 3; i++) store.log.appendRejected({ requestId: `r${i}`, receivedAt: 1_790_000_000_000, method: 'GET', route: '/v1/requests', modelName: null, status: 401, problemType: 'unauthorized', bodyBytes: null });
    store.log.flush();
    store.close();
    const { id } = await createKeyAction({ db, role: 'admin', label: 'ops' }, io());
    await listKeysAction({ db, json: false }, io());
    const raw = new BetterSqlite3(db);
    expect(raw.prepare('SELECT COUNT(*) AS n FROM rejected_requests').get()).toEqual({ n: 3 });
    raw.prepare('UPDATE scored_requests SET chain_hash = NULL').run();
    raw.close();
    // the service would not open this log any more, but a leaked key can still be revoked
    expect(() => openStore(db, { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 1000, rejectedRows: 1000 })).toThrow(/has no chain hash/);
    await revokeKeyAction({ db, id }, io());
    expect((await listKeysAction({ db, json: true }, io()))[0]?.revoked_at).not.toBeNull();
  });
});

describe('plumbline audit verify', () => {
  const db = tmp.file('audit.db');

  it('says intact and prints the head; exit 0', async () => {
    const store = openStore(db, { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 1000, rejectedRows: 10 });
    store.recordModel({ sha256: 'd'.repeat(64), name: 'm', version: '1', features: [{ name: 'a', unit: 'mm' }], classes: ['x', 'y'] });
    for (let i = 0; i < 5; i++) {
      await store.log.append([
        { requestId: `q-${i}`, batchId: null, receivedAt: 1_790_000_000_000 + i, model: { sha256: 'd'.repeat(64), name: 'm', version: '1' }, features: [i], tags: null, label: 'x', probabilities: [0.6, 0.4], margin: 0.2, inDomain: true, review: false, domain: { checks: [], outside: [] }, latencyUs: 10 },
      ]);
    }
    store.close();
    const t = io();
    const v = auditVerifyAction({ db, json: false }, t);
    expect(v.intact).toBe(true);
    // this store was not a serving one, so no head was kept beside it
    expect(t.out.text()).toBe(`intact: 5 rows chain from the first row to row 5\nno head file at ${db}.head: rows cut from the end could not be told (serving the database keeps one; or give --head)\nhead 5:${v.head.hash}\noutcomes intact: none recorded yet\n`);
    const run = cli('audit', 'verify', '--db', db);
    expect(run.status).toBe(0);
    expect(run.stdout).toContain(`head 5:${v.head.hash}`);
  });

  it('names the changed row and exits 1; with --head, catches rows cut from the end', () => {
    const head = auditVerifyAction({ db, json: true }, io()).head;
    const w = new BetterSqlite3(db);
    w.prepare('DELETE FROM scored_requests WHERE seq = 5').run();
    w.close();
    // alone, the shorter log is a valid chain; against the head recorded before, it is not
    expect(cli('audit', 'verify', '--db', db).status).toBe(0);
    const cut = cli('audit', 'verify', '--db', db, '--head', `${head.seq}:${head.hash}`);
    expect(cut.status).toBe(1);
    expect(cut.stdout).toMatch(/^NOT intact: removed at row 5\nthe log ends at row 4, but row 5 was recorded/);
    const w2 = new BetterSqlite3(db);
    w2.prepare("UPDATE scored_requests SET label = 'y' WHERE seq = 2").run();
    w2.close();
    const changed = cli('audit', 'verify', '--db', db);
    expect(changed.status).toBe(1);
    expect(changed.stdout).toMatch(/^NOT intact: changed at row 2 \(request q-1\)/);
    expect(() => parseAnchor('5:abc')).toThrow(/--head must be SEQ:HASH/);
  });

  it('recomputes the outcome chain too: exit 1 and the outcome named when one was changed', () => {
    const other = tmp.file('outcomes.db');
    const store = openStore(other, { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 1000, rejectedRows: 10 });
    store.recordModel({ sha256: 'e'.repeat(64), name: 'm', version: '1', features: [{ name: 'a', unit: 'mm' }], classes: ['x', 'y'] });
    return (async () => {
      await store.log.append([
        { requestId: 'o-1', batchId: null, receivedAt: 1_790_000_000_000, model: { sha256: 'e'.repeat(64), name: 'm', version: '1' }, features: [1], tags: null, label: 'x', probabilities: [0.6, 0.4], margin: 0.2, inDomain: true, review: false, domain: { checks: [], outside: [] }, latencyUs: 10 },
      ]);
      expect(store.outcomes.record([{ requestId: 'o-1', label: 'y', observedAt: null, source: 'gauge', replace: false }], null, 1_790_000_100_000)).toEqual([{ requestId: 'o-1', status: 'recorded' }]);
      store.close();
      const ok = auditVerifyAction({ db: other, json: false }, io());
      expect(ok.intact).toBe(true);
      expect(ok.outcomes).toMatchObject({ intact: true, rows: 1, head: { seq: 1 } });
      const w = new BetterSqlite3(other);
      w.prepare("UPDATE outcomes SET source = 'customer return' WHERE seq = 1").run();
      w.close();
      const run = cli('audit', 'verify', '--db', other);
      expect(run.status).toBe(1);
      expect(run.stdout).toContain('outcomes NOT intact: changed at outcome 1 (request o-1)');
    })();
  });

  it('never writes to the database it checks', () => {
    const before = new BetterSqlite3(db, { readonly: true });
    const version = before.pragma('data_version', { simple: true });
    const count = before.prepare('SELECT COUNT(*) AS n FROM scored_requests').get();
    before.close();
    auditVerifyAction({ db, json: false }, io());
    const after = new BetterSqlite3(db, { readonly: true });
    expect(after.prepare('SELECT COUNT(*) AS n FROM scored_requests').get()).toEqual(count);
    expect(after.pragma('data_version', { simple: true })).toBe(version);
    after.close();
  });
});
