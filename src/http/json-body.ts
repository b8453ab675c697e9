import type { FastifyRequest } from 'fastify';
import sjson from 'secure-json-parse';
import { ProblemError } from '../errors.js';

/**
 * JSON bodies, refusing __proto__ and constructor.prototype keys (prototype poisoning) as
 * fastify does, but keeping the parser's reason in the problem's detail.
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
  const text = typeof body === 'string' ? body : body.toString('utf8');
  if (text.trim() === '') {
    done(new ProblemError('invalid-json', 'the body is empty but the content-type says application/json'));
    return;
  }
  try {
    done(null, sjson.parse(text, { protoAction: 'error', constructorAction: 'error' }));
  } catch (err) {
    const reason = (err as Error).message.includes('prototype') ? 'it holds a __proto__ or constructor.prototype key, which is refused' : (err as Error).message;
    done(new ProblemError('invalid-json', `the body is not valid JSON: ${reason}`));
  }
}
