import type { Database } from 'better-sqlite3';
import { type ChainedRow, GENESIS, chainHash } from './chain.js';

export interface ChainProblem {
  kind: 'changed' | 'removed' | 'inserted' | 'unsealed' | 'anchor';
  seq: number;
  request_id: string | null;
  detail: string;
}

export interface ChainVerdict {
  intact: boolean;
  rows: number;
  /** Where verification started: after the genesis, or after a retention cut. */
  from: { seq: number; cut: boolean };
  /** The last row verified, its seq and chain hash (hex): record it elsewhere to anchor the log. */
  head: { seq: number; hash: string };
  /** The head recorded earlier, when given: found and equal, or pruned by retention before this check (not checked). */
  anchor: 'checked' | 'pruned' | null;
  problem: ChainProblem | null;
}

/** A head recorded earlier (seq and hex chain hash), which the log must still contain. */
export interface ChainAnchor {
  seq: number;
  hash: string;
}

export type StoredRow = ChainedRow & { chain_hash: Buffer | null };

/** The walk of a chain, row by row, whatever the rows are read from (SQLite, PostgreSQL). */
export interface ChainWalk {
  /** The next row in seq order; a verdict when the walk stops at it, else null. */
  push(row: StoredRow): ChainVerdict | null;
  /** After the last row. */
  finish(): ChainVerdict;
}

/**
 * The checks of verifyChain over rows given one at a time. `cp` is the newest retention
 * cut; `rowAt(seq)` looks one row up, to tell a row put in from one changed (null when
 * it cannot say, which then reports the row as changed).
 */
export function startChainWalk(cp: { seq: number; chain_hash: Buffer } | undefined, rowAt: (seq: number) => StoredRow | undefined, anchor?: ChainAnchor): ChainWalk {
  let prev = cp ? cp.chain_hash : GENESIS;
  let expect = cp ? cp.seq + 1 : 1;
  let rows = 0;
  let anchorSeen = false;
  let anchorState: ChainVerdict['anchor'] = null;
  const verdict = (problem: ChainProblem | null): ChainVerdict => ({
    intact: problem === null,
    rows,
    from: { seq: cp?.seq ?? 0, cut: cp !== undefined },
    head: { seq: expect - 1, hash: prev.toString('hex') },
    anchor: anchorState,
    problem,
  });
  return {
    push(row) {
      if (row.seq < expect) {
        return verdict({ kind: 'inserted', seq: row.seq, request_id: row.request_id, detail: `row ${row.seq} lies at or before the retention cut at ${expect - 1}, where every row was removed` });
      }
      if (row.seq > expect) {
        const gap = row.seq - 1 === expect ? `row ${expect} is missing` : `rows ${expect} to ${row.seq - 1} are missing`;
        return verdict({ kind: 'removed', seq: expect, request_id: null, detail: `${gap}: the chain goes from ${expect - 1} to ${row.seq}` });
      }
      if (!row.chain_hash) return verdict({ kind: 'unsealed', seq: row.seq, request_id: row.request_id, detail: `row ${row.seq} has no chain hash` });
      if (!chainHash(prev, row).equals(row.chain_hash)) {
        // A row put in before others, which were renumbered to make room: the next row is then the
        // one sealed at this seq, and chains from the previous hash once given its old number.
        const next = rowAt(row.seq + 1);
        if (next?.chain_hash && chainHash(prev, { ...next, seq: row.seq }).equals(next.chain_hash)) {
          return verdict({ kind: 'inserted', seq: row.seq, request_id: row.request_id, detail: `row ${row.seq} (request ${row.request_id}) was put in: the rows from it on were renumbered to make room` });
        }
        return verdict({ kind: 'changed', seq: row.seq, request_id: row.request_id, detail: `row ${row.seq} (request ${row.request_id}) does not hash to its stored chain hash: it was changed` });
      }
      prev = row.chain_hash;
      if (anchor && row.seq === anchor.seq) {
        if (prev.toString('hex') !== anchor.hash.toLowerCase()) {
          return verdict({ kind: 'anchor', seq: row.seq, request_id: row.request_id, detail: `row ${row.seq} has chain hash ${prev.toString('hex')}, not the ${anchor.hash} recorded: the log was rewritten up to here` });
        }
        anchorSeen = true;
        anchorState = 'checked';
      }
      expect++;
      rows++;
      return null;
    },
    finish() {
      if (anchor && !anchorSeen) {
        if (anchor.seq >= expect) {
          return verdict({ kind: 'removed', seq: expect, request_id: null, detail: `the log ends at row ${expect - 1}, but row ${anchor.seq} was recorded: rows from ${expect} on were removed` });
        }
        // The anchored row was pruned by retention: only a retention cut at exactly that row can be compared.
        if (cp && anchor.seq === cp.seq) {
          if (cp.chain_hash.toString('hex') !== anchor.hash.toLowerCase()) {
            return verdict({ kind: 'anchor', seq: anchor.seq, request_id: null, detail: `the retention cut at row ${anchor.seq} has chain hash ${cp.chain_hash.toString('hex')}, not the ${anchor.hash} recorded` });
          }
          anchorState = 'checked';
        } else anchorState = 'pruned';
      }
      return verdict(null);
    },
  };
}

/**
 * Recomputes the hash chain of scored_requests from the genesis, or from the newest retention
 * cut, and names the first row that was changed, removed or inserted. Streams the rows.
 * Without an anchor, rows cut from the end, or a chain rewritten whole, cannot be told from a
 * shorter log: give the head recorded earlier as `anchor` to check for that too.
 */
export function verifyChain(db: Database, anchor?: ChainAnchor): ChainVerdict {
  const cp = db.prepare('SELECT seq, chain_hash FROM retention_cuts ORDER BY seq DESC LIMIT 1').get() as { seq: number; chain_hash: Buffer } | undefined;
  const bySeq = db.prepare('SELECT * FROM scored_requests WHERE seq = ?');
  const walk = startChainWalk(cp, (seq) => bySeq.get(seq) as StoredRow | undefined, anchor);
  for (const row of db.prepare('SELECT * FROM scored_requests ORDER BY seq').iterate() as IterableIterator<StoredRow>) {
    const stop = walk.push(row);
    if (stop) return stop;
  }
  return walk.finish();
}

/** Whether the log holds a recorded head, looked up without walking the chain. */
export type AnchorCheck = { outcome: 'held' | 'pruned' } | { outcome: 'removed' | 'different'; detail: string };

/**
 * Checks one recorded head against the log without walking the chain (the start-up check of the
 * head file, and audit verify's): the row must be there with that hash, or lie behind a retention
 * cut. Whether the rows up to it chain is the walk's business (verifyChain).
 */
export function checkAnchor(db: Database, anchor: ChainAnchor): AnchorCheck {
  const want = anchor.hash.toLowerCase();
  const row = db.prepare('SELECT chain_hash FROM scored_requests WHERE seq = ?').get(anchor.seq) as { chain_hash: Buffer | null } | undefined;
  if (row) {
    const hash = row.chain_hash?.toString('hex') ?? 'none';
    return hash === want ? { outcome: 'held' } : { outcome: 'different', detail: `row ${anchor.seq} has chain hash ${hash}, not the ${anchor.hash} recorded: the log was rewritten up to there` };
  }
  const cp = db.prepare('SELECT seq, chain_hash FROM retention_cuts ORDER BY seq DESC LIMIT 1').get() as { seq: number; chain_hash: Buffer } | undefined;
  if (cp && anchor.seq <= cp.seq) {
    if (anchor.seq === cp.seq && cp.chain_hash.toString('hex') !== want) {
      return { outcome: 'different', detail: `the retention cut at row ${cp.seq} has chain hash ${cp.chain_hash.toString('hex')}, not the ${anchor.hash} recorded` };
    }
    return { outcome: 'pruned' };
  }
  const last = (db.prepare('SELECT MAX(seq) AS seq FROM scored_requests').get() as { seq: number | null }).seq ?? cp?.seq ?? 0;
  if (last > anchor.seq) return { outcome: 'removed', detail: `row ${anchor.seq}, recorded as a head, is missing from the log` };
  return { outcome: 'removed', detail: `the log ends at row ${last}, but row ${anchor.seq} was recorded: rows from ${last + 1} on were removed` };
}

/**
 * Whether the outcome chain still holds a head recorded earlier: the outcome of that seq with
 * that hash. Retention keeps outcomes, so a missing one was removed.
 */
export function checkOutcomeAnchor(db: Database, anchor: { seq: number; hash: string }): { outcome: 'held' } | { outcome: 'removed' | 'different'; detail: string } {
  const row = db.prepare('SELECT chain_hash FROM outcomes WHERE seq = ?').get(anchor.seq) as { chain_hash: Buffer } | undefined;
  if (row) {
    const hash = row.chain_hash.toString('hex');
    return hash === anchor.hash ? { outcome: 'held' } : { outcome: 'different', detail: `outcome ${anchor.seq} has chain hash ${hash}, not the ${anchor.hash} recorded: the outcomes were rewritten up to there` };
  }
  const last = (db.prepare('SELECT MAX(seq) AS seq FROM outcomes').get() as { seq: number | null }).seq ?? 0;
  if (last > anchor.seq) return { outcome: 'removed', detail: `outcome ${anchor.seq}, recorded as the outcome head, is missing` };
  return { outcome: 'removed', detail: `the outcomes end at ${last}, but outcome ${anchor.seq} was recorded: outcomes from ${last + 1} on were removed` };
}
