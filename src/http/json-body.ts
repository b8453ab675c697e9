import { isUtf8 } from 'node:buffer';
import type { FastifyRequest } from 'fastify';
import sjson from 'secure-json-parse';
import { ProblemError, pointer } from '../errors.js';
import { NOT_WELL_FORMED, firstInvalidUtf8, mayNeedScan, scanJson } from './json-scan.js';

/** Scoring routes say that a refused body scored nothing; the others need not. */
const scores = (req: FastifyRequest): boolean => /\/score(-batch)?$/.test(req.routeOptions.url ?? '');

const oneProblem = (req: FastifyRequest, at: Array<string | number>, detail: string): ProblemError =>
  new ProblemError('invalid-request', `the body has 1 problem${scores(req) ? '; nothing was scored' : ''}`, [{ pointer: pointer(at), detail }]);

/**
 * Transfer codings other than chunked are not undone here (nor by Node), so a body sent with one
 * would be read as if it had none. RFC 9112, section 6.1, says a server SHOULD answer 501 to a
 * coding it does not understand; this one answers 400, as the HTTP parser does for other unknown
 * codings (rot13 before chunked), so that a client's mistake does not count as a server fault.
 */
export function checkTransferCoding(req: FastifyRequest): ProblemError | null {
  const te = req.headers['transfer-encoding'];
  if (te === undefined) return null;
  const codings = te.split(',').map((c) => c.trim().toLowerCase());
  const unknown = codings.filter((c) => c !== 'chunked');
  if (unknown.length === 0) return null;
  return new ProblemError('invalid-request', `the body must be sent as it is, or chunked; transfer-encoding ${unknown.join(', ').slice(0, 64)} is not undone here (RFC 9112, section 6.1)`, [
    { header: 'transfer-encoding', detail: 'must be absent or chunked' },
  ]);
}

/**
 * JSON bodies (RFC 8259), read from the bytes: refused when they are not UTF-8 (section 8.1), when
 * they hold __proto__ or constructor.prototype keys (prototype poisoning, as fastify refuses
 * them), when a name is given twice in one object, or when a string is not well-formed Unicode;
 * the parser's reason is kept in the problem's detail.
 */
export function parseJsonBody(req: FastifyRequest, body: string | Buffer, done: (err: Error | null, value?: unknown) => void): void {
  // JSON is UTF-8 (RFC 8259, section 8.1); a body declared otherwise would be read wrong.
  const type = req.headers['content-type'];
  const charset = type === 'application/json' ? undefined : /;\s*charset\s*=\s*"?([^";\s]+)/i.exec(type ?? '')?.[1]?.toLowerCase();
  if (charset !== undefined && charset !== 'utf-8' && charset !== 'utf8') {
    done(new ProblemError('unsupported-media-type', `the body must be UTF-8 JSON, not charset=${charset}`, [{ header: 'content-type', detail: 'charset must be utf-8 when given' }]));
    return;
  }
  // Bodies are taken as sent; a compressed one would be parsed as garbage (RFC 9110, 8.4 and 15.5.16).
  const coding = req.headers['content-encoding'];
  if (coding !== undefined && coding.trim().toLowerCase() !== 'identity') {
    done(new ProblemError('unsupported-media-type', `the body must not be encoded (content-encoding: ${coding.slice(0, 64)}); send plain JSON`, [{ header: 'content-encoding', detail: 'must be absent or identity' }]));
    return;
  }
  const transfer = checkTransferCoding(req);
  if (transfer) {
    done(transfer);
    return;
  }
  const bytes = typeof body === 'string' ? Buffer.from(body, 'utf8') : body;
  const text = bytes.toString('utf8');
  if (!isUtf8(bytes)) {
    // Decoding would put U+FFFD in place of the bad bytes, and store that as if it had been sent.
    const at = firstInvalidUtf8(bytes);
    const where = scanJson(text, bytes.subarray(0, at).toString('utf8').length);
    done(where ? oneProblem(req, where.path, NOT_WELL_FORMED) : new ProblemError('invalid-json', `the body is not valid UTF-8 (RFC 8259, section 8.1): byte ${at} starts no UTF-8 character`));
    return;
  }
  if (text.trim() === '') {
    done(new ProblemError('invalid-json', 'the body is empty but the content-type says application/json'));
    return;
  }
  let value: unknown;
  try {
    value = sjson.parse(text, { protoAction: 'error', constructorAction: 'error' });
  } catch (err) {
    const reason = (err as Error).message.includes('prototype') ? 'it holds a __proto__ or constructor.prototype key, which is refused' : (err as Error).message;
    done(new ProblemError('invalid-json', `the body is not valid JSON: ${reason}`));
    return;
  }
  // The full walk only when a quick count cannot rule out what it looks for (json-scan.ts).
  const finding = mayNeedScan(text, value) ? scanJson(text) : null;
  if (finding?.kind === 'duplicate') {
    done(oneProblem(req, finding.path, 'appears twice in one object; JSON names should be unique (RFC 8259, section 4), and which value counts would be a guess'));
    return;
  }
  if (finding?.kind === 'lone-surrogate') {
    done(oneProblem(req, finding.path, NOT_WELL_FORMED));
    return;
  }
  done(null, value);
}
