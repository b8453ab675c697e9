// Every error a client can receive, declared once. Each is sent as RFC 9457 problem+json with
// `type` = PROBLEM_BASE + code; docs/api.md lists them.

export const PROBLEM_BASE = 'urn:plumbline:problem:';

export const PROBLEMS = {
  'invalid-request': { status: 400, title: 'The request does not match what this endpoint takes' },
  'invalid-json': { status: 400, title: 'The body is not valid JSON' },
  unauthorized: { status: 401, title: 'An API key is needed: Authorization: Bearer <key>' },
  forbidden: { status: 403, title: 'This API key may not do that' },
  'unknown-model': { status: 404, title: 'No model of that name is loaded' },
  'unlogged-model': { status: 404, title: 'The audit log holds no bundle of a model of that name' },
  'unknown-report': { status: 404, title: 'No drift report has that id' },
  'not-found': { status: 404, title: 'There is nothing at this path' },
  'unknown-request': { status: 404, title: 'No logged answer has that request id' },
  'unknown-tag': { status: 404, title: 'No logged answer carries that tag' },
  'ambiguous-tag': { status: 409, title: 'More than one logged answer carries that tag' },
  'outcome-conflict': { status: 409, title: 'A different outcome is already recorded for that answer' },
  'unknown-label': { status: 422, title: "The label is not a class of the answer's model" },
  'invalid-bundle': { status: 422, title: 'The body is not a bundle plumbline can load' },
  'incompatible-bundle': { status: 422, title: "The bundle does not take the model's logged features or classes" },
  'method-not-allowed': { status: 405, title: 'This path does not take that method' },
  'request-timeout': { status: 408, title: 'The request did not arrive in time' },
  'body-too-large': { status: 413, title: 'The body is larger than this service accepts' },
  'unsupported-media-type': { status: 415, title: 'The body must be application/json' },
  'reload-refused': { status: 422, title: 'The models directory cannot be served as it is; the models served before still are' },
  'rate-limited': { status: 429, title: 'Too many requests for this key; slow down and retry' },
  'headers-too-large': { status: 431, title: 'The request headers are larger than this service accepts' },
  'log-backpressure': { status: 503, title: 'The audit log is behind; nothing was scored, retry shortly' },
  'log-unavailable': { status: 503, title: 'The audit log cannot be written; nothing was scored' },
  'not-ready': { status: 503, title: 'The service is not ready' },
  'outcomes-unavailable': { status: 503, title: 'The audit log cannot be written now; no outcome of the batch was recorded' },
  overloaded: { status: 503, title: 'The service is overloaded; retry shortly' },
  internal: { status: 500, title: 'The service failed; the error is in its log' },
} as const satisfies Record<string, { status: number; title: string }>;

export type ProblemCode = keyof typeof PROBLEMS;

/** One bad field: `pointer` is a JSON Pointer into the body (RFC 9457, section 3 example), `parameter` a query parameter. */
export interface FieldError {
  pointer?: string;
  parameter?: string;
  header?: string;
  detail: string;
}

export interface ProblemDocument {
  type: string;
  title: string;
  status: number;
  detail: string;
  instance?: string;
  errors?: FieldError[];
}

/** Thrown by services and routes; the error handler turns it into problem+json. */
export class ProblemError extends Error {
  constructor(
    readonly code: ProblemCode,
    readonly detail: string,
    readonly errors?: FieldError[],
    readonly headers: Record<string, string> = {},
    cause?: unknown,
  ) {
    super(detail, cause === undefined ? undefined : { cause });
    this.name = 'ProblemError';
  }

  get status(): number {
    return PROBLEMS[this.code].status;
  }
}

export function problemDocument(code: ProblemCode, detail: string, errors?: FieldError[], instance?: string): ProblemDocument {
  const p = PROBLEMS[code];
  return {
    type: PROBLEM_BASE + code,
    title: p.title,
    status: p.status,
    detail,
    ...(instance !== undefined ? { instance } : {}),
    ...(errors && errors.length > 0 ? { errors } : {}),
  };
}

/** JSON Pointer (RFC 6901) in URI-fragment form, e.g. #/items/3/features/melt_temp_c. */
export function pointer(path: ReadonlyArray<PropertyKey>): string {
  return `#${path.map((k) => `/${encodeURIComponent(String(k).replaceAll('~', '~0').replaceAll('/', '~1'))}`).join('')}`;
}
