import { existsSync } from 'node:fs';
import type { ChainAnchor, ChainVerdict } from '../../store/audit-verify.js';
import { headFilePath, readHeadFile } from '../../store/head-file.js';
import type { OutcomeChainVerdict } from '../../store/outcomes-store.js';
import { openAuditReader } from '../../store/reader.js';
import { verifyServerAudit } from '../../store/postgres/open.js';
import { type CliIo, UsageError } from '../io.js';

/** seq:hash, as `audit verify` prints the head. */
export function parseAnchor(v: string): ChainAnchor {
  const m = /^(\d{1,15}):([0-9a-fA-F]{64})$/.exec(v.trim());
  if (!m) throw new UsageError('--head must be SEQ:HASH as audit verify printed it, e.g. 1999:3f2a…(64 hex digits)');
  return { seq: Number(m[1]), hash: (m[2] as string).toLowerCase() };
}

/** The head kept beside the database (<db>.head), as this run used it. */
export interface HeadFileUse {
  path: string;
  /**
   * held: the log holds it; pruned: retention removed its row, so it was not compared; absent: no
   * such file; ignored: --no-head-file; removed or different: the log does not hold it (see
   * problem); unreadable: the file is not a head record.
   */
  state: 'held' | 'pruned' | 'absent' | 'ignored' | 'removed' | 'different' | 'unreadable';
  seq: number | null;
  written_at: string | null;
}

/** The scored rows' chain, the head file, and the outcome chain (null before migration 009). */
export type AuditVerdict = ChainVerdict & { head_file: HeadFileUse; outcomes: OutcomeChainVerdict | null };

/**
 * `plumbline audit verify`: recomputes the hash chain of the audit log, read-only, and says
 * whether it is intact; exit 0 only when it is. Rows cut from the end leave a chain that verifies,
 * so it also checks that the log still holds the head the serving process keeps beside the
 * database (written after each WAL checkpoint), and with --head one recorded elsewhere.
 */
export function auditVerifyAction(ctx: { db: string; head?: ChainAnchor; json: boolean; headFile?: boolean }, io: CliIo): AuditVerdict {
  if (!existsSync(ctx.db)) throw new UsageError(`--db ${ctx.db}: no such file`);
  const path = headFilePath(ctx.db);
  const recorded = ctx.headFile === false ? null : readHeadFile(path);
  const use: HeadFileUse = { path, state: ctx.headFile === false ? 'ignored' : 'absent', seq: null, written_at: null };
  const reader = openAuditReader(ctx.db);
  let v: AuditVerdict;
  try {
    if (!reader.hasChain()) throw new UsageError(`${ctx.db} has no hash chain yet: start this version of plumbline on it once, to migrate and seal it`);
    v = { ...reader.verifyChain(ctx.head), head_file: use, outcomes: reader.verifyOutcomes() };
    if (recorded instanceof Error) {
      use.state = 'unreadable';
      if (v.intact) v = { ...v, intact: false, problem: { kind: 'anchor', seq: v.head.seq, request_id: null, detail: `${recorded.message}, so the end of the log cannot be checked against it (--no-head-file verifies without it)` } };
    } else if (recorded !== null) {
      use.seq = recorded.seq;
      use.written_at = recorded.written_at;
      const check = reader.checkAnchor(recorded);
      use.state = check.outcome === 'held' ? 'held' : check.outcome;
      if ('detail' in check && v.intact) {
        v = { ...v, intact: false, problem: { kind: check.outcome === 'removed' ? 'removed' : 'anchor', seq: recorded.seq, request_id: null, detail: `${check.detail} (the head kept in ${path}, written ${recorded.written_at})` } };
      }
      // Outcomes cut from the end of their chain leave it intact too: the head file names their head.
      if (recorded.outcomes !== undefined && v.outcomes !== null && v.outcomes.intact) {
        const o = reader.checkOutcomeAnchor(recorded.outcomes);
        if (o.outcome !== 'held') {
          v = { ...v, outcomes: { ...v.outcomes, intact: false, problem: { kind: o.outcome === 'removed' ? 'removed' : 'changed', seq: recorded.outcomes.seq, request_id: null, detail: `${o.detail} (the outcome head kept in ${path}, written ${recorded.written_at})` } } };
        }
      }
    }
  } finally {
    reader.close();
  }
  // The outcome rows chain on their own: the log is intact only when both chains are.
  const outcomesIntact = v.outcomes === null || v.outcomes.intact;
  if (!outcomesIntact) v = { ...v, intact: false };

  return printVerdict(v, ctx, use, io);
}

/**
 * `plumbline audit verify --db postgres://...`: the one chain every replica writes, read from the
 * server and checked as the SQLite one is. No head file: a server keeps no file beside it; give a
 * head recorded earlier with --head to check that the end of the log is still there.
 */
export async function auditVerifyServerAction(ctx: { db: string; head?: ChainAnchor; json: boolean }, io: CliIo): Promise<AuditVerdict> {
  const use: HeadFileUse = { path: '', state: 'ignored', seq: null, written_at: null };
  const { chain, outcomes } = await verifyServerAudit(ctx.db, ctx.head);
  // The outcome rows chain on their own: the log is intact only when both chains are.
  const v: AuditVerdict = { ...chain, intact: chain.intact && outcomes.intact, head_file: use, outcomes };
  return printVerdict(v, ctx, use, io);
}

function printVerdict(v: AuditVerdict, ctx: { head?: ChainAnchor; json: boolean }, use: HeadFileUse, io: CliIo): AuditVerdict {
  if (ctx.json) {
    io.stdout.write(`${JSON.stringify(v, null, 2)}\n`);
  } else if (v.intact || v.problem === null) {
    const from = v.from.cut ? `the retention cut after row ${v.from.seq}` : 'the first row';
    const through = v.anchor === 'checked' ? `, through the recorded head ${ctx.head?.seq}` : '';
    io.stdout.write(`intact: ${v.rows} row${v.rows === 1 ? ' chains' : 's chain'} from ${from} to row ${v.head.seq}${through}\n`);
    if (v.anchor === 'pruned') io.stdout.write(`the recorded head ${ctx.head?.seq} lies before the retention cut at ${v.from.seq}: retention removed it, so it was not checked\n`);
    if (use.path !== '') io.stdout.write(`${describeHeadFile(use, v.anchor !== null)}\n`);
    io.stdout.write(`head ${v.head.seq}:${v.head.hash}\n`);
    if (v.outcomes) io.stdout.write(`${describeOutcomes(v.outcomes)}\n`);
  } else {
    const p = v.problem!;
    io.stdout.write(`NOT intact: ${p.kind} at row ${p.seq}${p.request_id ? ` (request ${p.request_id})` : ''}\n${p.detail}\n`);
    io.stdout.write(`${v.rows} row${v.rows === 1 ? '' : 's'} before it verif${v.rows === 1 ? 'ies' : 'y'}; the chain up to ${v.rows === 1 ? 'it' : 'them'} ends at ${v.head.seq}:${v.head.hash}\n`);
    if (v.outcomes) io.stdout.write(`${describeOutcomes(v.outcomes)}\n`);
  }
  return v;
}

function describeOutcomes(o: OutcomeChainVerdict): string {
  if (o.intact && o.rows === 0) return 'outcomes intact: none recorded yet';
  if (o.intact) return `outcomes intact: ${o.rows} outcome${o.rows === 1 ? ' chains' : 's chain'} from the first to ${o.head.seq} (head ${o.head.seq}:${o.head.hash})`;
  const p = o.problem!;
  return `outcomes NOT intact: ${p.kind} at outcome ${p.seq}${p.request_id ? ` (request ${p.request_id})` : ''}\n${p.detail}`;
}

function describeHeadFile(u: HeadFileUse, headGiven: boolean): string {
  if (u.state === 'held') return `the log holds the head kept in ${u.path} (row ${u.seq}, written ${u.written_at})`;
  if (u.state === 'pruned') return `the head kept in ${u.path} (row ${u.seq}) lies before the retention cut: retention removed it, so it was not compared`;
  if (u.state === 'ignored') return `the head file ${u.path} was not read (--no-head-file)`;
  if (headGiven) return `no head file at ${u.path}; the --head given stands in for it`;
  return `no head file at ${u.path}: rows cut from the end could not be told (serving the database keeps one; or give --head)`;
}
