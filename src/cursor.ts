/**
 * A paging position, not a secret: `${tag}.${seq}` in base64url. A client can read it and could
 * write another one, which only moves where its own query resumes (the filters still apply, and
 * every row it reaches it could page to anyway); the tag and the round trip refuse what this
 * service would not have written, so a mangled cursor is a 400, never a silent restart.
 */
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
