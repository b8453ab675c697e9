import { mkdirSync } from 'node:fs';
import { dirname } from 'node:path';
import type { Database } from 'better-sqlite3';
import { type AlertsStore, createAlertsStore } from './alerts-store.js';
import { checkAnchor, checkOutcomeAnchor, verifyChain } from './audit-verify.js';
import { DatabaseUnwritableError, type OpenOptions, isUnwritable, openDatabase } from './database.js';
import { changedIdentity, recordIdentity } from './file-identity.js';
import { headFilePath, readHeadFile, writeHeadFile } from './head-file.js';
import { type ServeLock, acquireServeLock } from './serve-lock.js';
import { type KeysStore, createKeysStore } from './keys-store.js';
import { createOutcomesStore } from './outcomes-store.js';
import { type Retention, createRetention } from './retention.js';
import { createChainHeadReader, createOutcomeHeadReader } from './chain-head.js';
import { sealPreChainRows } from './seal.js';
import { startCheckpointer } from './checkpointer.js';
import { createDriftStore } from './drift-store.js';
import { recordModel } from './models-table.js';
import { type RequestLog, type WriterOptions, createRequestLog } from './request-log.js';
import type { Store, Sync } from './contract.js';
import { createRequestLookup, createRequestQuery } from './request-query.js';
import { DEFAULT_WAL_MAX_BYTES, createWalGate } from './wal-bound.js';
import { type WriteState, createWriteHealth } from './write-health.js';

export type { Store } from './contract.js';

/** The SQLite store: the contract of contract.ts, answered synchronously. */
export interface SqliteStore extends Omit<Sync<Store>, 'drift' | 'alerts' | 'keys' | 'outcomes' | 'retention'> {
  readonly kind: 'sqlite';
  readonly drift: ReturnType<typeof createDriftStore>;
  readonly alerts: Sync<AlertsStore>;
  readonly keys: Sync<KeysStore>;
  readonly outcomes: ReturnType<typeof createOutcomesStore>;
  readonly retention: Sync<Retention>;
  /** writeState().writable. */
  isWritable(): boolean;
}

export interface StoreOptions extends OpenOptions, WriterOptions {
  /** Run WAL checkpoints on a worker thread instead of on commits (the serving process). */
  backgroundCheckpoints?: boolean;
  /** Commit scored rows on a worker thread of their own, off the event loop (the serving process). */
  writerThread?: boolean;
  /**
   * The serving process: hold the lock file beside the database (serve-lock.ts; a second server
   * is refused), check at once that the database can be written, check the chain head kept
   * beside it (head-file.ts) and keep it at each checkpoint, and, with background checkpoints,
   * watch that the database's files stay the ones opened (file-identity.ts); `onFenced` hears
   * when they did not, and the log stops acknowledging.
   */
  serve?: { version: string; onFenced?: (reason: string) => void };
}

export function openStore(file: string, options: StoreOptions): SqliteStore {
  const serving = options.serve !== undefined && file !== ':memory:';
  let lock: ServeLock | null = null;
  if (serving) {
    try {
      mkdirSync(dirname(file), { recursive: true });
      lock = acquireServeLock(file);
    } catch (err) {
      throw isUnwritable(err) ? new DatabaseUnwritableError(file, err) : err;
    }
  }
  let db: Database;
  try {
    db = openDatabase(file, options);
  } catch (err) {
    lock?.release();
    throw err;
  }
  const headFile = serving ? headFilePath(file) : null;
  try {
    // A database opened read-only (an immutable file) migrates without a write when it is up to
    // date: this first write says so at start, not at the first answer.
    if (lock && options.serve) lock.announce(db, options.serve.version);
    sealPreChainRows(db);
    // The newest row must be sealed for the next to chain on; if not, the log was tampered with.
    createChainHeadReader(db)();
    if (headFile) checkHeadFile(db, file, headFile);
  } catch (err) {
    db.close();
    lock?.release();
    if (err instanceof StoreIntegrityError) throw err;
    if (isUnwritable(err)) throw new DatabaseUnwritableError(file, err);
    throw new StoreIntegrityError(`${file}: ${(err as Error).message}; run plumbline audit verify --db ${file}`);
  }
  let closed = false;
  const probe = db.prepare('INSERT INTO write_probe (id, at) VALUES (1, ?) ON CONFLICT (id) DO UPDATE SET at = excluded.at');
  const health = createWriteHealth(() => {
    if (closed) throw new Error('the store is closed');
    probe.run(Date.now());
  });
  // When the checkpoint thread stops, the writer thread's connection checkpoints again too (the
  // log does not exist yet if that happens at once; it then starts with checkpoints on).
  let started: RequestLog | null = null;
  const fence = (reason: string): void => {
    if (health.fenced() !== null) return;
    const message = `${reason}; nothing more is acknowledged until plumbline is restarted, and plumbline audit verify --db ${file} says whether rows were lost`;
    health.fence(message);
    started?.fence(message);
    // What the connections still hold in the WAL they opened goes into the database file they
    // opened, so that rows already answered are not left only in a removed file.
    try {
      db.pragma('wal_checkpoint(FULL)');
    } catch {
      // nothing more can be done from here
    }
    options.serve?.onFenced?.(message);
  };
  const checkpointer = options.backgroundCheckpoints
    ? startCheckpointer(db, {
        file,
        intervalMs: 1000,
        ...(headFile ? { headFile } : {}),
        onInline: () => started?.autocheckpoint(true),
      })
    : null;
  // Every second, beside the checkpoints: the files the connections hold must still be the ones
  // at these paths (file-identity.ts). A stat of two files; off the event loop it would be no cheaper.
  const identity = serving ? recordIdentity([file, `${file}-wal`]) : [];
  const watch = serving
    ? setInterval(() => {
        const reason = changedIdentity(identity);
        if (reason !== null) {
          fence(reason);
          clearInterval(watch as NodeJS.Timeout);
        }
      }, 1000)
    : null;
  watch?.unref();
  const thread = options.writerThread && file !== ':memory:' ? { file, sync: options.sync, autocheckpoint: checkpointer === null || checkpointer.stats().inline } : undefined;
  const log = createRequestLog(db, options, thread, {
    onStorage: (error) => health.record(error),
    // Past half of log.wal_max_bytes, the log holds its next commit for a full checkpoint (wal-bound.ts).
    ...(checkpointer ? { walGate: createWalGate(options.walMaxBytes ?? DEFAULT_WAL_MAX_BYTES, () => checkpointer.finish()) } : {}),
  });
  started = log;
  const query = createRequestQuery(db);
  const drift = createDriftStore(db);
  const alerts = createAlertsStore(db);
  const keys = createKeysStore(db);
  const outcomes = createOutcomesStore(db);
  const lockProbe = db.prepare('SELECT 1');
  const writeState = (): WriteState => {
    if (closed) return { writable: false, reason: 'the store is closed' };
    const state = health.state();
    if (!state.writable) return state;
    try {
      // BEGIN IMMEDIATE takes the write lock: it fails while another process holds it.
      db.exec('BEGIN IMMEDIATE');
      lockProbe.get();
      db.exec('ROLLBACK');
      return state;
    } catch (err) {
      if (db.inTransaction) db.exec('ROLLBACK');
      return { writable: false, reason: `the write lock cannot be taken: ${(err as Error).message}` };
    }
  };
  return {
    kind: 'sqlite',
    file,
    coordination: { exclusively: async (_name, work) => (await work(), true) },
    log,
    drift,
    alerts,
    keys,
    outcomes,
    headFile,
    retention: createRetention(db),
    verifyChain: (anchor) => verifyChain(db, anchor),
    recordModel: (m) => recordModel(db, m),
    queryRequests: query,
    getRequest: createRequestLookup(db),
    writeState,
    isWritable: () => writeState().writable,
    checkpoints: () => checkpointer?.stats() ?? null,
    close() {
      if (closed) return;
      log.close();
      closed = true;
      if (watch) clearInterval(watch);
      checkpointer?.stop();
      if (headFile) keepHeadAtClose(db, headFile);
      db.close();
      lock?.release();
    },
  };
}

/**
 * At start: the head kept beside the database must still be in the log. If rows were cut from
 * its end (a WAL removed under a running server, then a crash; a restore of an older copy), the
 * server does not chain new rows over the gap, which would leave the cut for only an audit to find.
 */
function checkHeadFile(db: Database, file: string, headFile: string): void {
  const head = readHeadFile(headFile);
  if (head === null) return;
  let problem: string;
  if (head instanceof Error) problem = head.message;
  else {
    const rows = checkAnchor(db, head);
    // The outcome chain's head too: new outcomes chained over removed ones would hide the cut.
    const outcomes = head.outcomes === undefined ? null : checkOutcomeAnchor(db, head.outcomes);
    if ('detail' in rows) problem = rows.detail;
    else if (outcomes !== null && 'detail' in outcomes) problem = outcomes.detail;
    else return;
  }
  throw new StoreIntegrityError(
    `${file}: the chain head kept in ${headFile} is not in the log: ${problem}. plumbline audit verify --db ${file} names what is missing; ` +
      `to serve on with the log as it is, move ${headFile} aside (and keep it: it records what was lost)`,
  );
}

/** At a clean close, the head of everything committed, after a checkpoint has synced it. */
function keepHeadAtClose(db: Database, headFile: string): void {
  try {
    const head = createChainHeadReader(db)();
    const outcomes = createOutcomeHeadReader(db)();
    const [r] = db.pragma('wal_checkpoint(PASSIVE)') as Array<{ busy: number }>;
    if (r?.busy === 0 && head.seq > 0) writeHeadFile(headFile, { seq: head.seq, hash: head.hash.toString('hex'), outcomes });
  } catch {
    // The head of the last checkpoint stays; it is older, not wrong.
  }
}

/** The audit log cannot be written on: its hash chain is broken at its head. */
export class StoreIntegrityError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'StoreIntegrityError';
  }
}
