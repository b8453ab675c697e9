import { MessageChannel, receiveMessageOnPort } from 'node:worker_threads';
import { startModuleWorker } from '../worker-boot.js';
import type { CommitOutcome, Committer, EncodedRow, RejectedRow } from './log-commit.js';
import type { WriterAnswer, WriterData, WriterRequest } from './log-worker.js';
import { DEFAULT_WAL_MAX_BYTES } from './wal-bound.js';

// Where the request log's batches are committed: on the event loop with the log's own
// connection, or on a writer thread with a connection of its own (log-worker.ts). The queue, the
// grouping and the acknowledgements stay in request-log.ts; a sink only commits what it is sent
// and reports each batch's outcome.

/** Where the commits run: on a thread of their own, or on the event loop. */
export type SinkKind = 'thread' | 'event-loop';

/** What the writer thread commits by (the request log's options of the same names). */
export interface CommitLimits {
  /** Rows per transaction at most. */
  flushRows: number;
  /** Newest rejected rows kept; null for a tool that must leave the table as it is. */
  rejectedRows: number | null;
  /** log.wal_max_bytes (wal-bound.ts); 64 MiB when not given. */
  walMaxBytes?: number;
}

/** The writer thread: the database file to open and how. */
export interface WriterThreadOptions {
  file: string;
  sync: 'normal' | 'full';
  /** false while another thread runs the WAL checkpoints. */
  autocheckpoint: boolean;
}

/** Where batches of requests go to be committed. */
export interface Sink {
  readonly kind: SinkKind;
  /** Commits one batch; `done` gets its outcome once (before send returns, on the event loop). */
  send(requests: EncodedRow[][], rejected: RejectedRow[], done: (o: CommitOutcome) => void): void;
  /** A batch is being committed, or the thread is starting: hold the next. */
  busy(): boolean;
  /** Returns once nothing is in flight, every outcome handled; blocks the event loop meanwhile. */
  drain(): void;
  /** Resolves once no batch is in flight (every outcome handled), without blocking. */
  idle(): Promise<void>;
  autocheckpoint(on: boolean): void;
  close(): void;
}

export function loopSink(committer: Committer): Sink {
  return {
    kind: 'event-loop',
    send: (requests, rejected, done) => done(committer.commit(requests, rejected)),
    busy: () => false,
    drain: () => undefined,
    // Each batch is committed and answered within send(): nothing is ever in flight.
    idle: () => Promise.resolve(),
    autocheckpoint: (on) => committer.setInline(on),
    close: () => undefined,
  };
}

/** The longest the event loop waits for the writer thread when it must (flush, close). */
const DRAIN_LIMIT_MS = 30_000;
/** Batches posted to the writer thread and not yet answered, at most; the rows after them wait. */
const IN_FLIGHT = 4;

/**
 * Commits on a worker thread (log-worker.ts) with a connection of its own. Each turn of the event
 * loop posts what waits as one batch, without waiting for the batch before (the thread commits
 * them in order, so the chain stays in order); at most IN_FLIGHT batches are out, and the rows
 * queued meanwhile make the next, larger one. When the thread fails, `onFail` hears why, and the
 * batches in flight fail: their rows may or may not be committed, and an answer must never claim
 * what is not known.
 */
export function threadSink(thread: WriterThreadOptions, options: CommitLimits, onAnswer: () => void, onFail: (reason: string) => void): Sink {
  const { port1, port2 } = new MessageChannel();
  const answered = new Int32Array(new SharedArrayBuffer(4));
  const data: WriterData = { ...thread, flushRows: options.flushRows, rejectedRows: options.rejectedRows, walMaxBytes: options.walMaxBytes ?? DEFAULT_WAL_MAX_BYTES, port: port2, answered };
  const worker = startModuleWorker(import.meta.url, 'log-worker', { workerData: data, transferList: [port2] });
  worker.unref();
  let state: 'starting' | 'ready' | 'failed' | 'stopped' = 'starting';
  const inFlight = new Map<number, { requests: number; done: (o: CommitOutcome) => void }>();
  let nextId = 1;
  /** Those waiting for the last batch in flight to be answered (idle()). */
  let idlers: Array<() => void> = [];
  const wake = (): void => {
    if (inFlight.size > 0 || idlers.length === 0) return;
    const now = idlers;
    idlers = [];
    for (const resolve of now) resolve();
  };
  const fail = (reason: string): void => {
    if (state === 'failed' || state === 'stopped') return;
    state = 'failed';
    void worker.terminate();
    port1.close();
    const batches = [...inFlight.values()];
    inFlight.clear();
    for (const b of batches) b.done({ failed: Array.from({ length: b.requests }, (_, index) => ({ index, message: reason })), transactions: 0, failedTransactions: 1, lastError: reason, storageError: null, walBytes: 0 });
    wake();
    onFail(reason);
  };
  const handle = (m: WriterAnswer): void => {
    if (m.type === 'ready') {
      if (state === 'starting') state = 'ready';
    } else if (m.type === 'failed') {
      fail(m.error);
      return;
    } else {
      const batch = inFlight.get(m.id);
      inFlight.delete(m.id);
      batch?.done(m.outcome);
      wake();
    }
    onAnswer();
  };
  port1.on('message', handle);
  port1.unref();
  worker.on('error', (err) => fail(`the audit log writer thread failed: ${err.message}`));
  worker.on('exit', () => fail('the audit log writer thread stopped'));
  const post = (m: WriterRequest): void => port1.postMessage(m);
  return {
    kind: 'thread',
    send(requests, rejected, done) {
      const id = nextId++;
      inFlight.set(id, { requests: requests.length, done });
      post({ type: 'commit', id, requests, rejected });
    },
    busy: () => state === 'starting' || inFlight.size >= IN_FLIGHT,
    idle: () => (inFlight.size === 0 ? Promise.resolve() : new Promise<void>((resolve) => idlers.push(resolve))),
    drain() {
      const deadline = Date.now() + DRAIN_LIMIT_MS;
      while (state === 'starting' || inFlight.size > 0) {
        const seen = Atomics.load(answered, 0);
        const got = receiveMessageOnPort(port1);
        if (got) {
          handle(got.message as WriterAnswer);
          continue;
        }
        if (Date.now() > deadline) {
          fail(`the audit log writer thread did not answer within ${DRAIN_LIMIT_MS / 1000} s`);
          return;
        }
        Atomics.wait(answered, 0, seen, 50);
      }
    },
    autocheckpoint: (on) => {
      if (state === 'starting' || state === 'ready') post({ type: 'autocheckpoint', on });
    },
    close() {
      if (state === 'failed' || state === 'stopped') return;
      state = 'stopped';
      post({ type: 'stop' });
    },
  };
}
