// Tags on the server are kept as the JSON text the service wrote (JSON.stringify of an object of
// strings), not as jsonb: jsonb cannot hold a string with an escaped NUL (\u0000), which a tag
// value may carry, and a cast of such a row fails the whole query. A pair is looked for in two
// steps: its JSON text narrows the rows in SQL, the parsed tags decide in Node.

/** `"key":"value"` as JSON.stringify writes the pair inside the object: what strpos looks for. */
export const pairText = (key: string, value: string): string => `${JSON.stringify(key)}:${JSON.stringify(value)}`;

/**
 * Whether stored tags carry every pair, each as a string: what SQLite's json_each test says
 * (store/request-query.ts). The narrowing text can also occur inside another value, so this decides.
 */
export function carries(tags: string | null, pairs: ReadonlyArray<readonly [string, string]>): boolean {
  if (tags === null) return false;
  let parsed: unknown;
  try {
    parsed = JSON.parse(tags);
  } catch {
    return false;
  }
  if (parsed === null || typeof parsed !== 'object' || Array.isArray(parsed)) return false;
  const t = parsed as Record<string, unknown>;
  return pairs.every(([k, v]) => Object.hasOwn(t, k) && t[k] === v);
}
