import { type ChainHead } from '../chain-head.js';
import { type ChainedRow, chainHash } from '../chain.js';
import { toFloat64Blob } from '../float64-blob.js';
import { type EncodedRow, type RejectedRow } from '../log-commit.js';
import { type LogCounts, createLogQueue } from '../log-queue.js';
import { type RequestLog, type WriterOptions } from '../request-log.js';
import { type Pool, type PoolClient, ServerError, isConstraint } from './pool.js';

/** Rows per INSERT statement: 19 parameters a row, under the protocol's 65,535 per statement. */
const ROWS_PER_INSERT = 2000;

const COLUMNS = [
  'seq', 'request_id', 'batch_id', 'received_at', 'model_sha256', 'model_name', 'model_version', 'features', 'tags', 'label',
  'probabilities', 'margin', 'in_domain', 'review', 'domain', 'latency_us', 'key_label', 'explained', 'chain_hash',
] as const;

export interface ServerLog extends RequestLog {
  /** Resolves once nothing is queued or in flight (after close(): once the last commit is done). */
  settle(): Promise<void>;
}

/** The values of one INSERT of many rows, and its placeholders. */
function insertStatement(rows: Array<ChainedRow & { chain_hash: Buffer }>, head: ChainHead): { text: string; values: unknown[] } {
  const values: unknown[] = [];
  const tuples: string[] = [];
  for (const r of rows) {
    const at = values.length;
    values.push(r.seq, r.request_id, r.batch_id, r.received_at, r.model_sha256, r.model_name, r.model_version, r.features, r.tags, r.label, r.probabilities, r.margin, r.in_domain, r.review, r.domain, r.latency_us, r.key_label, r.explained, r.chain_hash);
    tuples.push(`(${COLUMNS.map((_, i) => `$${at + i + 1}`).join(', ')})`);
  }
  const n = values.length;
  values.push(head.seq, head.hash);
  // The head moves in the same statement as the rows it ends, inside the transaction holding its lock.
  return {
    text: `WITH ins AS (INSERT INTO scored_requests (${COLUMNS.join(', ')}) VALUES ${tuples.join(', ')} RETURNING 1)
      UPDATE chain_head SET seq = $${n + 1}, hash = $${n + 2} WHERE id = 1 AND (SELECT COUNT(*) FROM ins) = ${rows.length}`,
    values,
  };
}

/**
 * Commits the rows of some requests in one transaction and one chain: the head row is locked
 * first (FOR UPDATE), so that every replica's commits join the chain one after another, in the
 * order they commit. Three round trips: lock and read the head; insert the rows and move the head
 * (one statement per ROWS_PER_INSERT rows); commit.
 */
async function commitRequests(client: PoolClient, requests: EncodedRow[][]): Promise<void> {
  const [, headResult] = (await client.query('BEGIN; SELECT seq, hash FROM chain_head WHERE id = 1 FOR UPDATE')) as unknown as [unknown, { rows: Array<{ seq: number; hash: Buffer }> }];
  const h = headResult.rows[0];
  if (!h) throw new Error('the chain_head row is missing: the schema is not plumbline\'s');
  let at: ChainHead = { seq: h.seq, hash: h.hash };
  try {
    let chunk: Array<ChainedRow & { chain_hash: Buffer }> = [];
    const send = async (): Promise<void> => {
      const s = insertStatement(chunk, at);
      const r = await client.query(s.text, s.values);
      if (r.rowCount !== 1) throw new Error('the chain head did not move with the rows');
      chunk = [];
    };
    for (const rows of requests) {
      for (const e of rows) {
        const row: ChainedRow = { ...e, seq: at.seq + 1, features: toFloat64Blob(e.features), probabilities: toFloat64Blob(e.probabilities) };
        const hash = chainHash(at.hash, row);
        chunk.push({ ...row, chain_hash: hash });
        at = { seq: row.seq, hash };
        if (chunk.length >= ROWS_PER_INSERT) await send();
      }
    }
    if (chunk.length > 0) await send();
    await client.query('COMMIT');
  } catch (err) {
    await client.query('ROLLBACK').catch(() => undefined);
    throw err;
  }
}

/**
 * The group-commit audit log on a PostgreSQL server, with the contract of request-log.ts: a
 * request's promise resolves only after the transaction holding its rows has committed; one
 * transaction at a time per replica, with everything queued meanwhile; a constraint failure is
 * retried request by request, anything else (the server down, a timeout) fails the batch, whose
 * requests are answered 503.
 */
export function createServerLog(pool: Pool, url: string, options: WriterOptions, hooks: { onStorage?(error: string | null): void } = {}): ServerLog {
  const queue = createLogQueue(options.queueRows, () => schedule());
  const stats: LogCounts = queue.counts;
  let inFlight: Promise<void> | null = null;
  let timer: NodeJS.Timeout | NodeJS.Immediate | null = null;
  let rejectedSincePrune = 0;

  function schedule(): void {
    if (timer !== null || inFlight !== null) return;
    const urgent = options.flushMs === 0 || queue.waiting() >= options.flushRows;
    timer = urgent ? setImmediate(flushNow) : setTimeout(flushNow, options.flushMs);
  }

  /** One transaction; on a constraint failure each request alone. Returns the failed indexes. */
  const settle = async (requests: EncodedRow[][]): Promise<Map<number, string>> => {
    const failed = new Map<number, string>();
    const attempt = async (group: EncodedRow[][]): Promise<void> => {
      const client = await pool.connect();
      let broken: Error | undefined;
      try {
        await commitRequests(client, group);
      } catch (err) {
        if (!isConstraint(err)) broken = err as Error;
        throw err;
      } finally {
        // A connection whose transaction failed for a reason of the server is not reused.
        client.release(broken);
      }
    };
    try {
      await attempt(requests);
      stats.transactions++;
      hooks.onStorage?.(null);
      return failed;
    } catch (err) {
      const message = new ServerError(url, err).message;
      stats.failedTransactions++;
      stats.lastError = message;
      if (!isConstraint(err) || requests.length === 1) {
        if (!isConstraint(err)) hooks.onStorage?.(message);
        requests.forEach((_, i) => failed.set(i, message));
        return failed;
      }
    }
    for (let i = 0; i < requests.length; i++) {
      try {
        await attempt([requests[i] as EncodedRow[]]);
        stats.transactions++;
      } catch (err) {
        const message = new ServerError(url, err).message;
        stats.failedTransactions++;
        stats.lastError = message;
        failed.set(i, message);
        if (!isConstraint(err)) hooks.onStorage?.(message);
      }
    }
    return failed;
  };

  const writeRejected = async (refused: RejectedRow[]): Promise<void> => {
    const values: unknown[] = [];
    const tuples: string[] = [];
    for (const r of refused) {
      const at = values.length;
      values.push(r.requestId, r.receivedAt, r.method, r.route, r.modelName, r.status, r.problemType, r.bodyBytes);
      tuples.push(`(${Array.from({ length: 8 }, (_, i) => `$${at + i + 1}`).join(', ')})`);
    }
    await pool.query(`INSERT INTO rejected_requests (request_id, received_at, method, route, model_name, status, problem_type, body_bytes) VALUES ${tuples.join(', ')}`, values);
    rejectedSincePrune += refused.length;
    if (options.rejectedRows !== null && rejectedSincePrune >= 1000) {
      rejectedSincePrune = 0;
      await pool.query('DELETE FROM rejected_requests WHERE seq <= (SELECT MAX(seq) FROM rejected_requests) - $1', [options.rejectedRows]);
    }
  };

  function flushNow(): void {
    timer = null;
    if (inFlight !== null || !queue.hasWork()) return;
    // At most flushRows rows a transaction, whole requests only; the rest waits for the next.
    const taken = queue.take(false, options.flushRows);
    inFlight = (async () => {
      const failed = taken.requests.length > 0 ? await settle(taken.requests) : new Map<number, string>();
      taken.settle(failed);
      if (taken.refused.length > 0) await writeRejected(taken.refused).catch((err: unknown) => (stats.lastError = new ServerError(url, err).message));
    })().finally(() => {
      inFlight = null;
      if (queue.hasWork()) schedule();
    });
  }

  return {
    append: (rows) => queue.append(rows),
    appendRejected: (row) => queue.appendRejected(row),
    flush() {
      if (timer !== null) {
        clearTimeout(timer as NodeJS.Timeout);
        clearImmediate(timer as NodeJS.Immediate);
        timer = null;
      }
      flushNow();
    },
    stats: () => ({ ...stats, waitingRows: queue.waiting(), writer: 'event-loop' }),
    close() {
      if (queue.isClosed()) return;
      this.flush();
      queue.close();
    },
    async settle() {
      while (inFlight !== null || queue.hasWork()) {
        if (inFlight === null) this.flush();
        await inFlight;
      }
    },
    autocheckpoint: () => undefined,
    fence: (reason) => queue.fence(reason),
  };
}
