import { createHash, randomBytes } from 'node:crypto';

/** Recognisable prefix of every key, so that a leaked one is easy to spot in a log or a file. */
export const KEY_PREFIX = 'plk_';

/**
 * A new API key: 32 random bytes in base64url after the prefix (256 bits, far beyond guessing).
 * Only its SHA-256 is stored; for a key of that entropy a fast hash is enough (common practice).
 */
export function generateKey(): { key: string; hash: string; prefix: string } {
  const key = `${KEY_PREFIX}${randomBytes(32).toString('base64url')}`;
  return { key, hash: hashKey(key), prefix: keyPrefix(key) };
}

/** The public part of a key, stored in the clear to find its record and shown by `keys list`. */
export function keyPrefix(key: string): string {
  return key.slice(0, KEY_PREFIX.length + 6);
}

export function hashKey(key: string): string {
  return createHash('sha256').update(key, 'utf8').digest('hex');
}

/** The key from an Authorization header ("Bearer <key>"), or null when there is none. */
export function bearerToken(header: string | undefined): string | null {
  if (!header) return null;
  const m = /^Bearer[ \t]+([A-Za-z0-9_\-.~+/=]{1,512})[ \t]*$/i.exec(header);
  return m ? (m[1] as string) : null;
}
