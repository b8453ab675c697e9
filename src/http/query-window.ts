import type { FieldError } from '../errors.js';

/**
 * The `from` and `to` of a listing's query string as Unix ms, and the error when `to` is not
 * later than `from` (an empty window is a mistake, not a question with an empty answer).
 */
export function queryWindow(q: { from?: string | undefined; to?: string | undefined }): { from?: number; to?: number; errors: FieldError[] } {
  const from = q.from === undefined ? undefined : Date.parse(q.from);
  const to = q.to === undefined ? undefined : Date.parse(q.to);
  const errors: FieldError[] = from !== undefined && to !== undefined && !(from < to) ? [{ parameter: 'to', detail: 'must be later than from' }] : [];
  return { ...(from !== undefined ? { from } : {}), ...(to !== undefined ? { to } : {}), errors };
}
