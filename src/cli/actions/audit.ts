import { existsSync } from 'node:fs';
import type { ChainAnchor, ChainVerdict } from '../../store/audit-verify.js';
import { openAuditReader } from '../../store/reader.js';
import { type CliIo, UsageError } from '../io.js';

/** seq:hash, as `audit verify` prints the head. */
export function parseAnchor(v: string): ChainAnchor {
  const m = /^(\d{1,15}):([0-9a-fA-F]{64})$/.exec(v.trim());
  if (!m) throw new UsageError('--head must be SEQ:HASH as audit verify printed it, e.g. 1999:3f2a…(64 hex digits)');
  return { seq: Number(m[1]), hash: (m[2] as string).toLowerCase() };
}

/**
 * `plumbline audit verify`: recomputes the hash chain of the audit log, read-only, and says
 * whether it is intact; exit 0 only when it is. With --head, also checks that the log still
 * holds a head recorded earlier (which catches rows cut from the end).
 */
export function auditVerifyAction(ctx: { db: string; head?: ChainAnchor; json: boolean }, io: CliIo): ChainVerdict {
  if (!existsSync(ctx.db)) throw new UsageError(`--db ${ctx.db}: no such file`);
  const reader = openAuditReader(ctx.db);
  let v: ChainVerdict;
  try {
    if (!reader.hasChain()) throw new UsageError(`${ctx.db} has no hash chain yet: start this version of plumbline on it once, to migrate and seal it`);
    v = reader.verifyChain(ctx.head);
  } finally {
    reader.close();
  }
  if (ctx.json) {
    io.stdout.write(`${JSON.stringify(v, null, 2)}\n`);
  } else if (v.intact) {
    const from = v.from.checkpoint ? `the retention checkpoint after row ${v.from.seq}` : 'the first row';
    const through = v.anchor === 'checked' ? `, through the recorded head ${ctx.head?.seq}` : '';
    io.stdout.write(`intact: ${v.rows} row${v.rows === 1 ? ' chains' : 's chain'} from ${from} to row ${v.head.seq}${through}\n`);
    if (v.anchor === 'pruned') io.stdout.write(`the recorded head ${ctx.head?.seq} lies before the retention checkpoint at ${v.from.seq}: retention removed it, so it was not checked\n`);
    io.stdout.write(`head ${v.head.seq}:${v.head.hash}\n`);
  } else {
    const p = v.problem!;
    io.stdout.write(`NOT intact: ${p.kind} at row ${p.seq}${p.request_id ? ` (request ${p.request_id})` : ''}\n${p.detail}\n`);
    io.stdout.write(`${v.rows} row${v.rows === 1 ? '' : 's'} before it verif${v.rows === 1 ? 'ies' : 'y'}; the chain up to ${v.rows === 1 ? 'it' : 'them'} ends at ${v.head.seq}:${v.head.hash}\n`);
  }
  return v;
}
