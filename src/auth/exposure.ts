import { isIPv4 } from 'node:net';

/** Whether a listen address reaches only this machine. */
export function isLoopback(host: string): boolean {
  const h = host.toLowerCase().replace(/^\[|\]$/g, '');
  if (h === 'localhost' || h === '::1') return true;
  return isIPv4(h) && h.startsWith('127.');
}

/**
 * The rule for serving without keys: on loopback it is allowed with a warning; on any other
 * address it is refused, unless auth is turned off on purpose. Returns the warning to log, or
 * throws the refusal.
 */
export function checkExposure(o: { host: string; auth: 'keys' | 'off'; keys: number; liveKeys: number }): string | null {
  if (o.auth === 'off') {
    return isLoopback(o.host) ? null : `auth is off: anyone who can reach ${o.host} may score, read the audit log and run reports`;
  }
  if (o.keys > 0 && o.liveKeys === 0) return 'every API key is revoked, so every /v1 request is refused with 401 until a new key is made (plumbline keys create)';
  if (o.keys > 0) return null;
  if (isLoopback(o.host)) return `no API keys exist, so no route asks for one; only this machine can reach ${o.host}. Make one with: plumbline keys create --db <file> --role admin --label <who>`;
  throw new ExposureError(
    `refusing to listen on ${o.host} with no API keys: anyone on the network could score and read the audit log. Create a key first (plumbline keys create --db <file> --role admin --label <who>), listen on 127.0.0.1, or pass --auth off if the network itself is trusted`,
  );
}

export class ExposureError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ExposureError';
  }
}
