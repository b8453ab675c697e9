// The audit log's writer thread: its own connection to the database, the commits of
// log-commit.ts, and an answer for every batch of requests posted to it. The event loop never
// waits on SQLite for a scored row; an answer still goes out only after its rows are committed.
import { type MessagePort, workerData } from 'node:worker_threads';
import BetterSqlite3 from 'better-sqlite3';
import { type CommitOutcome, type EncodedRow, type RejectedRow, createCommitter } from './log-commit.js';

export interface WriterData {
  file: string;
  sync: 'normal' | 'full';
  flushRows: number;
  rejectedRows: number | null;
  walMaxBytes: number;
  /** false while another thread runs the WAL checkpoints. */
  autocheckpoint: boolean;
  port: MessagePort;
  /** Counts the answers posted, so that the event loop can wait for one without its own loop turning. */
  answered: Int32Array;
}

export type WriterRequest =
  | { type: 'commit'; id: number; requests: EncodedRow[][]; rejected: RejectedRow[] }
  | { type: 'autocheckpoint'; on: boolean }
  | { type: 'stop' };

export type WriterAnswer = { type: 'ready' } | { type: 'failed'; error: string } | { type: 'committed'; id: number; outcome: CommitOutcome };

const data = workerData as WriterData;
const { port, answered } = data;
let failure: string | null = null;
let db: BetterSqlite3.Database | null = null;
let committer: ReturnType<typeof createCommitter> | null = null;
try {
  db = new BetterSqlite3(data.file, { fileMustExist: true });
  // As src/store/database.ts sets them for the connection it opens (migrations are its job).
  db.pragma('journal_mode = WAL');
  db.pragma(`synchronous = ${data.sync === 'full' ? 'FULL' : 'NORMAL'}`);
  db.pragma('foreign_keys = ON');
  db.pragma('busy_timeout = 250');
  if (!data.autocheckpoint) db.pragma('wal_autocheckpoint = 0');
  committer = createCommitter(db, { flushRows: data.flushRows, rejectedRows: data.rejectedRows, wal: { file: data.file, maxBytes: data.walMaxBytes, inline: data.autocheckpoint } });
} catch (err) {
  failure = `the audit log writer could not open ${data.file}: ${(err as Error).message}`;
}
/** Posts a message to the event loop and wakes it if it waits for one. */
const answer = (message: WriterAnswer): void => {
  port.postMessage(message);
  Atomics.add(answered, 0, 1);
  Atomics.notify(answered, 0);
};
answer(failure === null ? { type: 'ready' } : { type: 'failed', error: failure });

port.on('message', (m: WriterRequest) => {
  if (m.type === 'commit') {
    let outcome: CommitOutcome;
    try {
      if (!committer) throw new Error(failure ?? 'the audit log writer is not open');
      outcome = committer.commit(m.requests, m.rejected);
    } catch (err) {
      const message = (err as Error).message;
      outcome = { failed: m.requests.map((_, index) => ({ index, message })), transactions: 0, failedTransactions: 1, lastError: message, storageError: message, walBytes: 0 };
    }
    answer({ type: 'committed', id: m.id, outcome });
  } else if (m.type === 'autocheckpoint') {
    db?.pragma(`wal_autocheckpoint = ${m.on ? 1000 : 0}`);
    committer?.setInline(m.on);
  } else {
    db?.close();
    port.close();
  }
});
