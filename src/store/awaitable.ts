/** A value now (SQLite) or later (a database server). */
export type Awaitable<T> = T | Promise<T>;

/** The same contract answered synchronously: what the SQLite implementations give. */
export type Sync<T> = { [K in keyof T]: T[K] extends (...a: infer A) => Awaitable<infer R> ? (...a: A) => R : T[K] };
