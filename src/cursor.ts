/** A cursor the client cannot read or forge: `${tag}.${seq}` in base64url, checked on the way back. */
export class CursorError extends Error {
  constructor() {
    super('is not a cursor this service gave out');
    this.name = 'CursorError';
  }
}

export function cursorCodec(tag: string): { encode(seq: number): string; decode(cursor: string): number } {
  const pattern = new RegExp(`^${tag}\\.(\\d{1,16})$`);
  const encode = (seq: number): string => Buffer.from(`${tag}.${seq}`).toString('base64url');
  return {
    encode,
    decode(cursor) {
      const m = pattern.exec(Buffer.from(cursor, 'base64url').toString('utf8'));
      if (!m || encode(Number(m[1])) !== cursor) throw new CursorError();
      return Number(m[1]);
    },
  };
}
