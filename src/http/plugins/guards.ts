import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import fp from 'fastify-plugin';
import underPressure from '@fastify/under-pressure';
import { ProblemError } from '../../errors.js';
import { createRateWindow } from '../rate-window.js';
import { accessFor } from './auth.js';

export interface GuardOptions {
  /** Requests per minute per API key (per client address without keys); 0 for no limit. */
  requestsPerMinute: number;
  /** Refuse with 503 while the mean event-loop delay is above this many ms; 0 never. */
  eventLoopDelayMs: number;
  /** Whether the server is shutting down: answers then ask the client to close the connection. */
  closing?: () => boolean;
}

const isPublic = (req: FastifyRequest): boolean => req.routeOptions.config.access === 'public';

// Our pages hold inline CSS and no script; nothing else may load or frame them.
const SECURITY_HEADERS = { 'x-content-type-options': 'nosniff', 'referrer-policy': 'no-referrer', 'x-frame-options': 'DENY' } as const;
const HTML_POLICY = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; form-action 'none'; frame-ancestors 'none'";

/**
 * What keeps the service up and its answers where they belong: shedding load while the event
 * loop lags (@fastify/under-pressure), the request gate (Host header, key, rate limit per key:
 * rate-window.ts), and security headers on every answer. Liveness and readiness are never shed
 * or limited.
 */
async function guards(app: FastifyInstance, options: GuardOptions): Promise<void> {
  if (options.eventLoopDelayMs > 0) {
    await app.register(underPressure, {
      maxEventLoopDelay: options.eventLoopDelayMs,
      // One second, under-pressure's default: a single long task (a big batch) does not look like
      // an overloaded loop, while a loop that lags on average still does.
      sampleInterval: 1000,
      pressureHandler: (req: FastifyRequest, _reply: FastifyReply, _type: string, value: number | undefined) =>
        isPublic(req)
          ? undefined
          : Promise.reject(
              new ProblemError(
                'overloaded',
                `${Number.isFinite(value) ? `the event loop lags ${Math.round(value ?? 0)} ms behind` : 'the event loop was blocked for the whole of the last second'} (limits.event_loop_delay_ms is ${options.eventLoopDelayMs}); nothing was done, retry shortly`,
                undefined,
                { 'retry-after': '1' },
              ),
            ),
    });
  }
  // One onRequest hook for every request's gate, in this order: the Host header, the key
  // (auth.ts), the rate limit. The callback form: an async hook costs a promise and a turn of the
  // microtask queue on every request, and each further hook a step of fastify's hook runner.
  const limit = options.requestsPerMinute > 0 ? rateLimit(options.requestsPerMinute) : null;
  app.addHook('onRequest', (req, reply, done) => {
    // Node would answer a missing Host with a bare 400 (app.ts lets it through); problem+json here.
    if (req.headers.host === undefined && req.raw.httpVersion === '1.1') {
      done(new ProblemError('invalid-request', 'an HTTP/1.1 request must carry a Host header (RFC 9112, section 3.2)', [{ header: 'host', detail: 'is missing' }]));
      return;
    }
    const declared = req.routeOptions.config.access;
    let pending: void | Promise<void>;
    try {
      pending = app.checkKey(req, accessFor(declared, req.url));
    } catch (err) {
      done(err as Error);
      return;
    }
    // The limit counts only requests whose key passed, so that it is keyed on that key; routes
    // declared public (liveness, readiness, the API description) are never limited.
    const next = (): void => done(declared === 'public' ? undefined : limit?.(req, reply));
    if (pending instanceof Promise) pending.then(next, (err: Error) => done(err));
    else next();
  });
  const closing = options.closing ?? (() => false);
  app.addHook('onSend', (_req, reply, payload, done) => {
    reply.headers(SECURITY_HEADERS);
    if (!reply.hasHeader('cache-control')) reply.header('cache-control', 'no-store');
    if (String(reply.getHeader('content-type') ?? '').startsWith('text/html')) reply.header('content-security-policy', HTML_POLICY);
    if (closing()) reply.header('connection', 'close');
    done(null, payload);
  });
}

/**
 * Requests a minute per key when keys are in use (the key is checked first), else per client
 * address (rate-window.ts): sets the x-ratelimit headers and gives the 429 problem once the
 * window is spent, undefined while it is not.
 */
function rateLimit(requestsPerMinute: number): (req: FastifyRequest, reply: FastifyReply) => ProblemError | undefined {
  const window = createRateWindow(requestsPerMinute, 60_000);
  return (req, reply) => {
    const v = window.take(req.apiKey ? `key:${req.apiKey.id}` : `ip:${req.ip}`, Date.now());
    const reset = Math.max(1, Math.ceil(v.resetMs / 1000));
    reply.header('x-ratelimit-limit', v.limit).header('x-ratelimit-remaining', v.remaining).header('x-ratelimit-reset', reset);
    if (v.allowed) return undefined;
    return new ProblemError('rate-limited', `more than ${v.limit} requests a minute came from this ${req.apiKey ? 'key' : 'address'} (limits.requests_per_minute); retry in ${reset} s`, undefined, {
      'retry-after': String(reset),
    });
  };
}

export default fp(guards, { name: 'guards', fastify: '5.x', dependencies: ['auth'] });
