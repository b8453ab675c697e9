// The checkpoint thread (checkpointer.ts starts it): its own connection, a PASSIVE checkpoint every
// intervalMs, a full pass when the request log holds its commits for one (wal-bound.ts), and the
// chain head written beside the database after each checkpoint (head-file.ts).
import { statSync } from 'node:fs';
import { workerData, parentPort } from 'node:worker_threads';
import BetterSqlite3 from 'better-sqlite3';
import { createChainHeadReader, createOutcomeHeadReader } from './chain-head.js';
import { writeHeadFile } from './head-file.js';

export interface CheckpointerData {
  file: string;
  intervalMs: number;
  /** Where to keep the chain head; null for none. */
  headFile: string | null;
}

export type CheckpointerRequest = { type: 'finish'; id: number } | { type: 'stop' };

export type CheckpointerAnswer =
  | { type: 'pass'; ok: true; walBytes: number }
  | { type: 'pass'; ok: false; error: string }
  | { type: 'finished'; id: number; complete: boolean; walBytes: number };

interface CheckpointResult {
  busy: number;
  log: number;
  checkpointed: number;
}

const data = workerData as CheckpointerData;
const port = parentPort!;
const db = new BetterSqlite3(data.file, { fileMustExist: true });
db.pragma('busy_timeout = 1000');
const readHead = createChainHeadReader(db);
const readOutcomeHead = createOutcomeHeadReader(db);
const wal = `${data.file}-wal`;
const walBytes = (): number => statSync(wal, { throwIfNoEntry: false })?.size ?? 0;
const checkpoint = (): CheckpointResult => (db.pragma('wal_checkpoint(PASSIVE)') as CheckpointResult[])[0] as CheckpointResult;
const post = (m: CheckpointerAnswer): void => port.postMessage(m);

let written = '';

function pass(): void {
  try {
    // Read before the checkpoint: a checkpoint that copies anything syncs the WAL first (also
    // with synchronous=NORMAL), so once it has run, the head read here survives a power loss too.
    const head = data.headFile === null ? null : readHead();
    const outcomes = data.headFile === null ? null : readOutcomeHead();
    const r = checkpoint();
    // seq 0 is the empty log (or one pruned whole): nothing to anchor yet.
    if (head && head.seq > 0 && data.headFile !== null && r.busy === 0) {
      const hash = head.hash.toString('hex');
      const key = `${head.seq}:${hash}/${outcomes?.seq ?? 0}:${outcomes?.hash ?? ''}`;
      if (key !== written) {
        writeHeadFile(data.headFile, { seq: head.seq, hash, outcomes });
        written = key;
      }
    }
    post({ type: 'pass', ok: true, walBytes: walBytes() });
  } catch (err) {
    post({ type: 'pass', ok: false, error: (err as Error).message });
  }
}

/** The request log holds its commits meanwhile; the few already on their way finish first. */
function finish(id: number): void {
  let complete = false;
  try {
    for (let i = 0; i < 3 && !complete; i++) {
      const r = checkpoint();
      complete = r.busy === 0 && r.checkpointed === r.log;
    }
  } catch {
    // Answered as incomplete: the log goes on, and the next pass tries again.
  }
  post({ type: 'finished', id, complete, walBytes: walBytes() });
}

const timer = setInterval(pass, data.intervalMs);
port.on('message', (m: CheckpointerRequest) => {
  if (m.type === 'finish') finish(m.id);
  else {
    clearInterval(timer);
    db.close();
    port.close();
  }
});
