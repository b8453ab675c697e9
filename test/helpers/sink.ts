import { type Logger, pino } from 'pino';
import { Writable } from 'node:stream';

/** A writable that keeps what is written, to assert on what a user would see. */
export function sink(): Writable & { text(): string } {
  const parts: string[] = [];
  const w = new Writable({
    write(chunk: Buffer | string, _enc, cb) {
      parts.push(chunk.toString());
      cb();
    },
  }) as Writable & { text(): string };
  w.text = () => parts.join('');
  return w;
}

/** A pino logger whose JSON lines are kept, to assert on what the service logs. */
export function capturedLogger(level = 'info'): { logger: Logger; lines: string[] } {
  const lines: string[] = [];
  return { logger: pino({ level }, { write: (l: string) => void lines.push(l) }), lines };
}
