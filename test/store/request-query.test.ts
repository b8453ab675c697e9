import type { Database } from 'better-sqlite3';
import { beforeAll, describe, expect, it } from 'vitest';
import { openDatabase } from '../../src/store/database.js';
import { recordModel } from '../../src/store/models-table.js';
import { type ScoredRow, createRequestLog } from '../../src/store/request-log.js';
import { CursorError, createRequestQuery } from '../../src/store/request-query.js';
import { tempDir } from '../helpers/datasets.js';

const tmp = tempDir();
let db: Database;
const MODEL = { sha256: 'c'.repeat(64), name: 'press', version: '2' };
const T0 = Date.parse('2026-12-01T06:00:00Z');

beforeAll(async () => {
  db = openDatabase(tmp.file('q.db'), { sync: 'normal' });
  recordModel(db, { ...MODEL, features: [{ name: 'force_kn', unit: 'kN' }, { name: 'stroke_mm', unit: 'mm' }], classes: ['ok', 'crack'] });
  const log = createRequestLog(db, { flushMs: 0, flushRows: 100, queueRows: 1000, rejectedRows: 10 });
  const rows: ScoredRow[] = Array.from({ length: 10 }, (_, i) => ({
    requestId: `r${i}`,
    batchId: null,
    receivedAt: T0 + i * 60_000,
    model: MODEL,
    features: [100 + i, 5],
    tags: (i % 2 === 0 ? { line: 'L1' } : { line: 'L2', shift: 'night' }) as Record<string, string>,
    label: i < 7 ? 'ok' : 'crack',
    probabilities: [0.9, 0.1],
    margin: 0.8,
    inDomain: i !== 4,
    review: false,
    domain: { checks: [], outside: [] },
    latencyUs: 1500,
  }));
  await log.append(rows);
});

describe('audit log queries', () => {
  const query = () => createRequestQuery(db);

  it('decode vectors and probabilities by the model\'s feature and class names', () => {
    const [item] = query()({}, 1).items;
    expect(item).toMatchObject({ request_id: 'r9', features: { force_kn: 109, stroke_mm: 5 }, probabilities: { ok: 0.9, crack: 0.1 }, latency_ms: 1.5 });
    expect(item!.received_at).toBe('2026-12-01T06:09:00.000Z');
  });

  it('combine filters with AND', () => {
    const ids = (f: Parameters<ReturnType<typeof query>>[0]) => query()(f, 100).items.map((i) => i.request_id);
    expect(ids({ label: 'crack' })).toEqual(['r9', 'r8', 'r7']);
    expect(ids({ inDomain: false })).toEqual(['r4']);
    expect(ids({ tags: [['line', 'L2'], ['shift', 'night']], label: 'ok' })).toEqual(['r5', 'r3', 'r1']);
    expect(ids({ from: T0 + 2 * 60_000, to: T0 + 4 * 60_000 })).toEqual(['r3', 'r2']);
    expect(ids({ model: 'other' })).toEqual([]);
  });

  it('page through everything exactly once, newest first', () => {
    const seen: string[] = [];
    let cursor: string | undefined;
    do {
      const page = query()({ tags: [['line', 'L1']] }, 2, cursor);
      seen.push(...page.items.map((i) => i.request_id));
      cursor = page.next_cursor ?? undefined;
    } while (cursor);
    expect(seen).toEqual(['r8', 'r6', 'r4', 'r2', 'r0']);
  });

  it('refuse a cursor they did not give out', () => {
    expect(() => query()({}, 5, 'bm9wZQ')).toThrow(CursorError);
    expect(() => query()({}, 5, Buffer.from('r1.12abc').toString('base64url'))).toThrow(CursorError);
  });
});
