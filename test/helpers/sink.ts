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
