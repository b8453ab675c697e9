import { CursorError } from '../cursor.js';
import { ProblemError } from '../errors.js';

/** Runs fn, turning a cursor that does not decode into a 400 naming the `cursor` parameter. */
export function withCursor<T>(fn: () => T): T {
  try {
    return fn();
  } catch (err) {
    if (err instanceof CursorError) throw new ProblemError('invalid-request', 'the cursor is not valid', [{ parameter: 'cursor', detail: err.message }]);
    throw err;
  }
}
