import { CursorError } from '../cursor.js';
import { ProblemError } from '../errors.js';

const asProblem = (err: unknown): unknown =>
  err instanceof CursorError ? new ProblemError('invalid-request', 'the cursor is not valid', [{ parameter: 'cursor', detail: err.message }]) : err;

/**
 * Runs fn, turning a cursor that does not decode into a 400 naming the `cursor` parameter,
 * whether fn throws it (SQLite) or its promise rejects with it (PostgreSQL).
 */
export function withCursor<T>(fn: () => T): T {
  try {
    const out = fn();
    if (out instanceof Promise) {
      return out.catch((err: unknown) => {
        throw asProblem(err);
      }) as T;
    }
    return out;
  } catch (err) {
    throw asProblem(err);
  }
}
