import { isUtf8 } from 'node:buffer';
import type { FastifyRequest } from 'fastify';
import sjson from 'secure-json-parse';
import { ProblemError, pointer } from '../errors.js';
import { NOT_WELL_FORMED, firstInvalidUtf8, scanJson } from './json-scan.js';

/** Scoring routes say that a refused body scored nothing; the others need not. */
const scores = (req: FastifyRequest): boolean => /\/score(-batch)?$/.test(req.routeOptions.url ?? '');

const oneProblem = (req: FastifyRequest, at: Array<string | number>, detail: string): ProblemError =>
  new ProblemError('invalid-request', `the body has 1 problem${scores(req) ? '; nothing was scored' : ''}`, [{ pointer: pointer(at), detail }]);

/**
 * JSON bodies (RFC 8259), read from the bytes: refused when they are not UTF-8 (section 8.1), when
 * they hold __proto__ or constructor.prototype keys (prototype poisoning, as fastify refuses
 * them), when a name is given twice in one object, or when a string is not well-formed Unicode;
 * the parser's reason is kept in the problem's detail.
 */
export function parseJsonBody(req: FastifyRequest, body: string | Buffer, done: (err: Error | null, value?: unknown) => void): void {
  // JSON is UTF-8 (RFC 8259, section 8.1); a body declared otherwise would be read wrong.
  const charset = /;\s*charset\s*=\s*"?([^";\s]+)/i.exec(req.headers['content-type'] ?? '')?.[1]?.toLowerCase();
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
  const finding = scanJson(text);
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
