import type { FastifyError, FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { STATUS_CODES } from 'node:http';
import fp from 'fastify-plugin';
import { type FieldError, PROBLEMS, type ProblemCode, ProblemError, problemDocument, pointer } from '../errors.js';
import { RequestValidationError } from './validation.js';

interface IssueLike {
  code?: string;
  message?: string;
  path?: PropertyKey[];
  keys?: string[];
  errors?: IssueLike[][];
}

/**
 * Turns zod issues into field errors. For a union (features by name or as an array) the branch
 * that got furthest into the value explains the problem; "no union member matched" would not.
 */
function flatten(issue: IssueLike, at: PropertyKey[]): Array<{ path: PropertyKey[]; detail: string }> {
  if (issue.code === 'invalid_union' && issue.errors && issue.errors.length > 0) {
    const depth = (branch: IssueLike[]): number => Math.max(0, ...branch.map((i) => i.path?.length ?? 0));
    const best = issue.errors.reduce((a, b) => (depth(b) > depth(a) ? b : a));
    if (depth(best) > 0) return best.flatMap((i) => flatten(i, [...at, ...(i.path ?? [])]));
    return [{ path: at, detail: 'must be an object of feature values by name, or an array of them in the bundle order' }];
  }
  if (issue.code === 'unrecognized_keys' && issue.keys) {
    return issue.keys.map((k) => ({ path: [...at, k], detail: 'is not a field this endpoint takes' }));
  }
  return [{ path: at, detail: issue.message ?? 'is not valid' }];
}

function validationErrors(err: RequestValidationError): FieldError[] {
  const context = err.validationContext ?? 'body';
  return err.issues.flatMap((issue) =>
    flatten(issue as IssueLike, issue.path).map(({ path, detail }) => {
      if (context === 'body') return { pointer: pointer(path), detail };
      if (context === 'querystring') return { parameter: String(path[0] ?? ''), detail };
      if (context === 'headers') return { header: String(path[0] ?? ''), detail };
      return { pointer: pointer([context, ...path]), detail };
    }),
  );
}

const SHED = new Set<ProblemCode>(['overloaded', 'log-backpressure', 'not-ready']);

export interface Rejection {
  code: ProblemCode;
  status: number;
  request: FastifyRequest;
}

export interface ProblemsOptions {
  /** limits.body_bytes, to say it in a 413. */
  bodyLimit: number;
  /** Told of every refused request, to keep a record of what garbage arrived. */
  onRejected?: (r: Rejection) => void;
}

declare module 'fastify' {
  interface FastifyContextConfig {
    /** A scoring route: its refusals say that nothing was scored. */
    scoring?: boolean;
  }
}

/**
 * Maps any error to RFC 9457 problem+json; the stack and internals stay in the service log.
 * `scoring`: the request was for a scoring route.
 */
export function toProblem(err: FastifyError, bodyLimit: number, scoring = false): ProblemError {
  if (err instanceof ProblemError) return err;
  if (err instanceof RequestValidationError) {
    const errors = validationErrors(err);
    const where = err.validationContext === 'querystring' ? 'query string' : err.validationContext === 'params' ? 'path' : 'body';
    const count = `${errors.length} problem${errors.length === 1 ? '' : 's'}`;
    return new ProblemError('invalid-request', where === 'body' ? `the body has ${count}${scoring ? '; nothing was scored' : ''}` : `the ${where} has ${count}`, errors);
  }
  switch (err.code) {
    case 'FST_ERR_BAD_URL':
      return new ProblemError('invalid-request', 'the URL is not valid: a percent sign must be followed by two hex digits', [{ parameter: 'path', detail: 'is not a valid URL path' }]);
    case 'FST_ERR_MAX_PARAM_LENGTH':
      return new ProblemError('not-found', 'a segment of the path is longer than 256 characters, so nothing can be there');
    case 'FST_ERR_CTP_BODY_TOO_LARGE':
      return new ProblemError('body-too-large', `the body is larger than ${bodyLimit} bytes (limits.body_bytes)`);
    case 'FST_ERR_CTP_INVALID_MEDIA_TYPE':
    case 'FST_ERR_CTP_INVALID_TYPE':
      return new ProblemError('unsupported-media-type', 'send the body as application/json', [{ header: 'content-type', detail: 'must be application/json' }]);
    case 'FST_ERR_CTP_INVALID_CONTENT_LENGTH':
      return new ProblemError('invalid-request', 'the content-length does not match the body', [{ header: 'content-length', detail: 'does not match the body' }]);
    default:
      break;
  }
  if (typeof err.statusCode === 'number' && err.statusCode >= 400 && err.statusCode < 500) {
    if (err.statusCode === 413) return new ProblemError('body-too-large', err.message);
    if (err.statusCode === 415) return new ProblemError('unsupported-media-type', err.message);
    return new ProblemError('invalid-request', err.message);
  }
  return new ProblemError('internal', 'the service failed while answering; the error is in its log');
}

/**
 * Answers a malformed request on the raw socket, before fastify sees a request (the headers are
 * too large, the request line cannot be parsed, the request timed out): problem+json all the same.
 */
export function clientErrorHandler(err: NodeJS.ErrnoException & { code?: string }, socket: import('node:stream').Duplex): void {
  if (err.code === 'ECONNRESET' || !socket.writable) return;
  const code: ProblemCode = err.code === 'HPE_HEADER_OVERFLOW' ? 'headers-too-large' : err.code === 'ERR_HTTP_REQUEST_TIMEOUT' ? 'request-timeout' : 'invalid-request';
  const detail = code === 'headers-too-large' ? 'the request headers are too large' : code === 'request-timeout' ? 'the request did not arrive within the request timeout' : 'the request could not be parsed as HTTP';
  const body = JSON.stringify(problemDocument(code, detail));
  const status = PROBLEMS[code].status;
  socket.end(`HTTP/1.1 ${status} ${STATUS_CODES[status] ?? ''}\r\nContent-Type: application/problem+json\r\nContent-Length: ${Buffer.byteLength(body)}\r\nConnection: close\r\n\r\n${body}`);
}

export function sendProblem(reply: FastifyReply, problem: ProblemError): FastifyReply {
  return reply
    .code(problem.status)
    .headers(problem.headers)
    .type('application/problem+json')
    .send(problemDocument(problem.code, problem.detail, problem.errors, reply.request.url.split('?')[0]));
}

// Route patterns such as /v1/models/:name, to tell 405 (the path exists) from 404.
function patternRegex(url: string): RegExp {
  const escaped = url.replace(/[.*+?^${}()|[\]\\]/g, '\\$&').replace(/:[A-Za-z_]\w*/g, '[^/]+');
  return new RegExp(`^${escaped}$`);
}

async function problems(app: FastifyInstance, options: ProblemsOptions): Promise<void> {
  const routes: Array<{ method: string; regex: RegExp }> = [];
  app.addHook('onRoute', (route) => {
    const methods = Array.isArray(route.method) ? route.method : [route.method];
    for (const m of methods) routes.push({ method: m, regex: patternRegex(route.url) });
  });

  const refuse = (request: FastifyRequest, reply: FastifyReply, problem: ProblemError): FastifyReply => {
    options.onRejected?.({ code: problem.code, status: problem.status, request });
    return sendProblem(reply, problem);
  };

  app.setErrorHandler((err: FastifyError, request, reply) => {
    const problem = toProblem(err, options.bodyLimit, request.routeOptions.config.scoring === true);
    // Shedding load is the service working as meant: a warning without a stack, so that a flood of
    // refusals does not become a flood of error logs on top of the load.
    if (SHED.has(problem.code)) request.log.warn({ problem: problem.code, status: problem.status }, 'request shed');
    else if (problem.status >= 500) request.log.error({ err: problem.code === 'internal' ? err : (err.cause ?? err), problem: problem.code }, 'request failed');
    else request.log.info({ problem: problem.code, status: problem.status }, 'request refused');
    return refuse(request, reply, problem);
  });

  app.setNotFoundHandler((request, reply) => {
    const path = request.url.split('?')[0] ?? '';
    const allowed = [...new Set(routes.filter((r) => r.regex.test(path)).map((r) => r.method))];
    if (allowed.length > 0) {
      return refuse(
        request,
        reply,
        new ProblemError('method-not-allowed', `${path} takes ${allowed.join(', ')}, not ${request.method}`, undefined, { allow: allowed.join(', ') }),
      );
    }
    return refuse(request, reply, new ProblemError('not-found', `nothing is at ${path}; GET /openapi.json lists every route`));
  });
}

export default fp(problems, { name: 'problems', fastify: '5.x' });
