import { describe, expect, it } from 'vitest';
import type { ScoredRow } from '../../src/store/log-commit.js';
import { LogBackpressureError, LogClosedError, LogWriteError, createLogQueue } from '../../src/store/log-queue.js';

let n = 0;
function row(): ScoredRow {
  n++;
  return {
    requestId: `req-${n}`,
    batchId: null,
    receivedAt: 1_800_000_000_000 + n,
    model: { sha256: 'a'.repeat(64), name: 'm', version: '1' },
    features: [1, 2],
    tags: null,
    label: 'ok',
    probabilities: [0.25, 0.75],
    margin: 0.5,
    inDomain: true,
    review: false,
    domain: { checks: [], outside: [] },
    latencyUs: 120,
  };
}
const rows = (k: number): ScoredRow[] => Array.from({ length: k }, row);

/** How each promise ended, once the microtasks have run. */
async function outcomes(promises: Array<Promise<void>>): Promise<string[]> {
  const settled = await Promise.allSettled(promises);
  return settled.map((s) => (s.status === 'fulfilled' ? 'ok' : (s.reason as Error).name));
}

describe('the audit log queue shared by both stores', () => {
  it('takes whole requests up to the row cap, and at least one request however large', async () => {
    const q = createLogQueue(100, () => undefined);
    const answers = [q.append(rows(3)), q.append(rows(3)), q.append(rows(5))];
    const first = q.take(false, 7);
    expect(first.requests.map((r) => r.length)).toEqual([3, 3]);
    expect(q.waiting()).toBe(11);
    first.settle(new Map());
    const second = q.take(false, 2);
    expect(second.requests.map((r) => r.length)).toEqual([5]);
    second.settle(new Map([[0, 'disk full']]));
    expect(await outcomes(answers)).toEqual(['ok', 'ok', 'LogWriteError']);
    expect(q.waiting()).toBe(0);
    expect(q.counts).toMatchObject({ committedRows: 6, failedRows: 5 });
    expect(q.hasWork()).toBe(false);
  });

  it('refuses rows beyond its bound, counting what is still in flight', async () => {
    const q = createLogQueue(5, () => undefined);
    const inFlight = q.append(rows(4));
    const taken = q.take(false);
    const refused = q.append(rows(2));
    await expect(refused).rejects.toBeInstanceOf(LogBackpressureError);
    taken.settle(new Map());
    await inFlight;
    void q.append(rows(5));
    expect(q.waiting()).toBe(5);
  });

  it('fails one request whose row cannot be encoded, and takes the others', async () => {
    const q = createLogQueue(100, () => undefined);
    const bad = row();
    const circular: Record<string, unknown> = {};
    circular.self = circular;
    (bad as unknown as { domain: unknown }).domain = circular;
    const answers = [q.append(rows(1)), q.append([bad]), q.append(rows(2))];
    const taken = q.take(false);
    expect(taken.requests.map((r) => r.length)).toEqual([1, 2]);
    taken.settle(new Map([[1, 'constraint']]));
    expect(await outcomes(answers)).toEqual(['ok', 'LogWriteError', 'LogWriteError']);
    expect(q.counts.failedRows).toBe(3);
    expect(q.waiting()).toBe(0);
  });

  it('once fenced, refuses what waits and fails what was in flight even if it committed', async () => {
    const q = createLogQueue(100, () => undefined);
    const inFlight = q.append(rows(1));
    const taken = q.take(true);
    const waiting = q.append(rows(1));
    q.fence('the database file was replaced');
    taken.settle(new Map());
    expect(await outcomes([inFlight, waiting])).toEqual(['LogWriteError', 'LogWriteError']);
    const after = q.append(rows(1));
    await expect(after).rejects.toBeInstanceOf(LogWriteError);
    await expect(after).rejects.toThrow('the database file was replaced');
    expect(q.counts.lastError).toBe('the database file was replaced');
  });

  it('wakes its log for rows and refusals, keeps refusals within the bound, and refuses rows once closed', async () => {
    let wakes = 0;
    const q = createLogQueue(2, () => wakes++);
    const refusal = { requestId: 'r', receivedAt: 1, method: 'POST', route: '/v1/models/m/score', modelName: 'm', status: 400, problemType: 'about:blank', bodyBytes: 3 };
    for (let i = 0; i < 5; i++) q.appendRejected(refusal);
    expect(wakes).toBe(5);
    expect(q.take(false).refused).toHaveLength(2);
    q.close();
    await expect(q.append(rows(1))).rejects.toBeInstanceOf(LogClosedError);
    q.appendRejected(refusal);
    expect(q.hasWork()).toBe(false);
  });
});
