import type { Database, Statement } from 'better-sqlite3';
import { createChainHeadReader, type ChainHead } from './chain-head.js';
import { type ChainedRow, chainHash } from './chain.js';
import { toFloat64Blob } from './float64-blob.js';
import { createWalWatch } from './wal-bound.js';

// The commits of the audit log, the same whether they run on the event loop or on the writer
// thread (log-worker.ts): rows in, per request committed or not out.

export interface ScoredRow {
  requestId: string;
  batchId: string | null;
  receivedAt: number;
  model: { sha256: string; name: string; version: string };
  features: ArrayLike<number>;
  tags: Record<string, string> | null;
  label: string;
  probabilities: ArrayLike<number>;
  margin: number;
  inDomain: boolean;
  review: boolean;
  domain: { checks: unknown[]; outside: unknown[] };
  latencyUs: number;
  /** Label of the API key the request came with; null when keys are not in use. */
  keyLabel?: string | null;
  /** Whether the answer carried an explanation. */
  explained?: boolean;
}

export interface RejectedRow {
  requestId: string;
  receivedAt: number;
  method: string;
  route: string;
  modelName: string | null;
  status: number;
  problemType: string;
  bodyBytes: number | null;
}

/**
 * A scored row with its columns as stored, but for the chain's seq and the blobs. With `own`, the
 * vectors are copied into arrays of their own, so that the row can be posted to another thread (a
 * view into a larger buffer would carry the whole buffer with it); without, a Float64Array is
 * kept as it is, and the commit on the event loop reads it in place.
 */
export type EncodedRow = Omit<ChainedRow, 'seq' | 'features' | 'probabilities'> & { features: Float64Array; probabilities: Float64Array };

const vector = (v: ArrayLike<number>, own: boolean): Float64Array => (!own && v instanceof Float64Array ? v : Float64Array.from(v));

export function encodeRow(r: ScoredRow, own = true): EncodedRow {
  return {
    request_id: r.requestId,
    batch_id: r.batchId,
    received_at: r.receivedAt,
    model_sha256: r.model.sha256,
    model_name: r.model.name,
    model_version: r.model.version,
    features: vector(r.features, own),
    tags: r.tags ? JSON.stringify(r.tags) : null,
    label: r.label,
    probabilities: vector(r.probabilities, own),
    margin: r.margin,
    in_domain: r.inDomain ? 1 : 0,
    review: r.review ? 1 : 0,
    domain: JSON.stringify(r.domain),
    latency_us: Math.round(r.latencyUs),
    key_label: r.keyLabel ?? null,
    explained: r.explained ? 1 : 0,
  };
}

export interface CommitOutcome {
  /** Index (in the requests given) and error of each request whose rows are not in the log. */
  failed: Array<{ index: number; message: string }>;
  transactions: number;
  failedTransactions: number;
  lastError: string | null;
  /**
   * Set when a commit failed for a reason of the storage (a full disk, a read-only or locked
   * file, an I/O error) rather than of one request's rows: readiness hears of it.
   */
  storageError: string | null;
  /** The WAL file's size after the commits, when measured (0 otherwise). */
  walBytes: number;
}

export interface Committer {
  /** Whether this connection checkpoints the WAL itself past its trigger (wal-bound.ts). */
  setInline(on: boolean): void;
  /** Commits each request's rows, all or none of a request, in transactions of at most flushRows rows. */
  commit(requests: EncodedRow[][], rejected: RejectedRow[]): CommitOutcome;
}

export interface CommitterOptions {
  flushRows: number;
  rejectedRows: number | null;
  /**
   * The database file and log.wal_max_bytes (wal-bound.ts): the WAL is measured after each
   * commit, and with `inline` (no checkpoint thread) the writer checkpoints it itself.
   */
  wal?: { file: string; maxBytes: number; inline: boolean };
}

export function createCommitter(db: Database, options: CommitterOptions): Committer {
  const wal = options.wal ? createWalWatch(db, options.wal.file, options.wal.maxBytes, options.wal.inline) : null;
  const insertScored: Statement = db.prepare(`INSERT INTO scored_requests
    (seq, request_id, batch_id, received_at, model_sha256, model_name, model_version, features, tags, label,
     probabilities, margin, in_domain, review, domain, latency_us, key_label, explained, chain_hash)
    VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`);
  // Every row is sealed with the hash of the one before (src/store/chain.ts).
  const readHead = createChainHeadReader(db);
  const insertRejected: Statement = db.prepare(`INSERT INTO rejected_requests
    (request_id, received_at, method, route, model_name, status, problem_type, body_bytes)
    VALUES (?, ?, ?, ?, ?, ?, ?, ?)`);
  const pruneRejected: Statement = db.prepare('DELETE FROM rejected_requests WHERE seq <= (SELECT MAX(seq) FROM rejected_requests) - ?');
  let rejectedSincePrune = 0;
  // Also at start: a service that restarts often would otherwise never reach the prune count.
  // Best effort: a locked database now must not stop the service from starting.
  const prune = (): void => {
    if (options.rejectedRows !== null) pruneRejected.run(options.rejectedRows);
  };
  let startError: string | null = null;
  try {
    prune();
  } catch (err) {
    startError = (err as Error).message;
  }

  /** Inserts a row after `at` in the chain and returns the new head; the caller commits it. */
  const writeScored = (e: EncodedRow, at: ChainHead): ChainHead => {
    const row: ChainedRow = { ...e, seq: at.seq + 1, features: toFloat64Blob(e.features), probabilities: toFloat64Blob(e.probabilities) };
    const hash = chainHash(at.hash, row);
    // Positional parameters: binding by name costs a lookup per column per row.
    insertScored.run(
      row.seq,
      row.request_id,
      row.batch_id,
      row.received_at,
      row.model_sha256,
      row.model_name,
      row.model_version,
      row.features,
      row.tags,
      row.label,
      row.probabilities,
      row.margin,
      row.in_domain,
      row.review,
      row.domain,
      row.latency_us,
      row.key_label,
      row.explained,
      hash,
    );
    return { seq: row.seq, hash };
  };
  // IMMEDIATE: the write lock is taken before the head is read, so that another connection
  // writing the log (the CLI, or the event loop after the writer thread stopped) waits its turn
  // instead of chaining on the same head. A rolled-back transaction leaves nothing to undo.
  const commitRows = db.transaction((requests: EncodedRow[][]): void => {
    let at = readHead();
    for (const rows of requests) for (const r of rows) at = writeScored(r, at);
  }).immediate;
  const commitRejected = db.transaction((refused: RejectedRow[]): void => {
    for (const r of refused) insertRejected.run(r.requestId, r.receivedAt, r.method, r.route, r.modelName, r.status, r.problemType, r.bodyBytes);
  }).immediate;

  return {
    setInline: (on) => wal?.setInline(on),
    commit(requests, rejected) {
      const out: CommitOutcome = { failed: [], transactions: 0, failedTransactions: 0, lastError: startError, storageError: null, walBytes: 0 };
      startError = null;
      /** One transaction for requests [from, to); on a constraint failure, each alone. */
      const settle = (from: number, to: number): void => {
        try {
          commitRows(requests.slice(from, to));
          out.transactions++;
          return;
        } catch (err) {
          out.lastError = (err as Error).message;
          out.failedTransactions++;
          // Only a constraint violation belongs to one request's rows. Anything else (a locked or
          // full disk, an I/O error) would fail each retry alike, and retrying one by one would hold
          // the writer for a busy timeout per request: fail the group at once.
          const code = (err as { code?: string }).code ?? '';
          if (!code.startsWith('SQLITE_CONSTRAINT')) out.storageError = (err as Error).message;
          if (to - from === 1 || !code.startsWith('SQLITE_CONSTRAINT')) {
            for (let i = from; i < to; i++) out.failed.push({ index: i, message: (err as Error).message });
            return;
          }
        }
        // A constraint failed: find the request it belongs to by committing each on its own.
        for (let i = from; i < to; i++) {
          try {
            commitRows([requests[i] as EncodedRow[]]);
            out.transactions++;
          } catch (err) {
            out.lastError = (err as Error).message;
            out.failedTransactions++;
            out.failed.push({ index: i, message: (err as Error).message });
            if (!((err as { code?: string }).code ?? '').startsWith('SQLITE_CONSTRAINT')) out.storageError = (err as Error).message;
          }
        }
      };
      // Transactions of at most flushRows rows, whole requests only.
      let from = 0;
      let rows = 0;
      for (let i = 0; i < requests.length; i++) {
        const n = (requests[i] as EncodedRow[]).length;
        if (rows > 0 && rows + n > options.flushRows) {
          settle(from, i);
          from = i;
          rows = 0;
        }
        rows += n;
      }
      if (from < requests.length) settle(from, requests.length);
      if (rejected.length > 0) {
        try {
          commitRejected(rejected);
          rejectedSincePrune += rejected.length;
          if (rejectedSincePrune >= 1000) {
            prune();
            rejectedSincePrune = 0;
          }
        } catch (err) {
          out.lastError = (err as Error).message;
          out.storageError = (err as Error).message;
        }
      }
      if (wal && out.transactions > 0) out.walBytes = wal.afterCommit();
      return out;
    },
  };
}
