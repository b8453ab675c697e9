import type { LoggedRequest, RequestPage } from '../contracts/logged-request.js';
import type { AlertsStore } from './alerts-store.js';
import type { ChainAnchor, ChainVerdict } from './audit-verify.js';
import type { CheckpointerStats } from './checkpointer.js';
import type { DriftStore } from './drift-store.js';
import type { KeysStore } from './keys-store.js';
import type { OutcomesStore } from './outcomes-store.js';
import type { ModelRecord } from './models-table.js';
import type { RequestFilter } from './request-query.js';
import type { RequestLog } from './request-log.js';
import type { Retention } from './retention.js';
import type { WriteState } from './write-health.js';
import type { Awaitable } from './awaitable.js';

// The contract every store keeps, SQLite (one process, an embedded file) and PostgreSQL (several
// replicas on one server). A method that needs a round trip to a server returns a promise there;
// SQLite answers at once with the value itself, so that its callers pay no promise on the paths
// where it matters (the key check on every request, the scoring path: `log.append` is a promise
// in both, resolved when the rows are committed).

export type { Awaitable, Sync } from './awaitable.js';

/** Work that must happen on one replica at a time (the nightly reports, the alert evaluation). */
export interface Coordination {
  /**
   * Runs `work` if no other process holds `name` now, holding it meanwhile; resolves to false
   * at once when another does. A single-process store always runs it.
   */
  exclusively(name: string, work: () => Promise<void>): Promise<boolean>;
}

/** Everything the rest of the service may ask of the database; SQL stays behind this. */
export interface Store {
  readonly kind: 'sqlite' | 'postgres';
  /** The database as given: a file path, or a URL with its password masked. */
  readonly file: string;
  readonly log: RequestLog;
  /** Reads and writes of the drift reports. */
  readonly drift: DriftStore;
  /** Window aggregates, alert records and the webhook outbox. */
  readonly alerts: AlertsStore;
  /** API keys, stored as hashes. */
  readonly keys: KeysStore;
  /**
   * What the parts turned out to be: recorded in a chain of their own (one across replicas on
   * PostgreSQL), read by the requests listing, the outcomes report, the drift report's outcome
   * figures, the alert signals, export and compare.
   */
  readonly outcomes: OutcomesStore;
  /** Prunes old rows, keeping the hash chain verifiable. */
  readonly retention: Retention;
  readonly coordination: Coordination;
  /** Recomputes the audit log's hash chain (plumbline audit verify). */
  verifyChain(anchor?: ChainAnchor): Awaitable<ChainVerdict>;
  recordModel(m: ModelRecord): Awaitable<void>;
  queryRequests(filter: RequestFilter, limit: number, cursor?: string): Awaitable<RequestPage>;
  /** One logged request by its request id, or null. */
  getRequest(requestId: string): Awaitable<LoggedRequest | null>;
  /**
   * Whether the audit log can be written now (readiness): the last commits succeeded, or a test
   * write does (write-health.ts), and the write lock can be taken.
   */
  writeState(): Awaitable<WriteState>;
  /** The background checkpointer's record, when there is one (SQLite serving only). */
  checkpoints(): CheckpointerStats | null;
  /** The file beside the database where the chain head is kept (SQLite serving only). */
  readonly headFile: string | null;
  close(): Awaitable<void>;
}
