/** A value now (SQLite) or later (a database server). */
export type Awaitable<T> = T | Promise<T>;

/** The same contract answered synchronously: what the SQLite implementations give. */
export type Sync<T> = { [K in keyof T]: T[K] extends (...a: infer A) => Awaitable<infer R> ? (...a: A) => R : T[K] };

/**
 * Hands every row of a store's stream to `fn`: SQLite's one at a time, synchronously; a server's
 * in pages from a cursor. `fn` returns a promise only when it must wait (a lookup on a server);
 * on SQLite it answers at once, so that nothing else runs on the connection while its iterator
 * is open.
 */
export async function forEachRow<T>(source: Iterable<T> | AsyncIterable<T[]>, fn: (row: T) => Awaitable<void>): Promise<void> {
  if (Symbol.asyncIterator in source) {
    for await (const page of source as AsyncIterable<T[]>) {
      for (const row of page) {
        const wait = fn(row);
        if (wait instanceof Promise) await wait;
      }
    }
    return;
  }
  for (const row of source as Iterable<T>) {
    const wait = fn(row);
    if (wait instanceof Promise) await wait;
  }
}
