import { UsageError } from './io.js';

/** A listen failure the user can fix (port taken, no permission, no such address) as a UsageError; anything else unchanged. */
export function asListenError(err: unknown, host: string, port: number): unknown {
  const code = (err as NodeJS.ErrnoException).code;
  if (code === 'EADDRINUSE' || code === 'EACCES' || code === 'EADDRNOTAVAIL') {
    return new UsageError(`cannot listen on ${host}:${port} (${code}${code === 'EADDRINUSE' ? ': another process has the port; stop it or pass --port' : ''})`);
  }
  return err;
}
