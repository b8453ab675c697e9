import { StringDecoder } from 'node:string_decoder';

export interface CsvRecord {
  /** Line on which the record starts (1-based, as a text editor counts). */
  line: number;
  fields: string[];
}

/** A malformed record: the line is where the problem was found. */
export class CsvSyntaxError extends Error {
  constructor(
    readonly line: number,
    reason: string,
  ) {
    super(reason);
    this.name = 'CsvSyntaxError';
  }
}

/** Longest field and widest record accepted; anything beyond is garbage, not process data. */
export const MAX_FIELD_CHARS = 1 << 20;
export const MAX_FIELDS = 1 << 16;

const QUOTE = 0x22;
const COMMA = 0x2c;
const CR = 0x0d;
const LF = 0x0a;

const enum State {
  FieldStart,
  Unquoted,
  Quoted,
  QuoteInQuoted,
}

/**
 * Streaming RFC 4180 parser: comma-separated, double-quoted fields with "" as an escaped quote,
 * records ended by CRLF, LF or a lone CR, UTF-8 with an optional byte order mark. Blank lines
 * are skipped. Line numbers count every line break in the file, including those inside quoted
 * fields, so a reported line is the one a text editor shows.
 */
export async function* parseCsvRecords(chunks: AsyncIterable<Buffer | string>): AsyncGenerator<CsvRecord> {
  const decoder = new StringDecoder('utf8');
  let state: State = State.FieldStart;
  let fields: string[] = [];
  let field = '';
  let line = 1;
  let recordLine = 1;
  let afterCR = false;
  let first = true;
  let quotedFrom = 0;
  let quotedCR = false;
  let wasQuoted = false;
  const out: CsvRecord[] = [];

  const endField = (): void => {
    if (field.length > MAX_FIELD_CHARS) throw new CsvSyntaxError(recordLine, `a field is longer than ${MAX_FIELD_CHARS} characters`);
    if (fields.length >= MAX_FIELDS) throw new CsvSyntaxError(recordLine, `a record has more than ${MAX_FIELDS} fields`);
    fields.push(field);
    field = '';
  };
  const endRecord = (): void => {
    const blank = fields.length === 0 && field === '' && !wasQuoted; // "" is a record of one empty field
    endField();
    if (!blank) out.push({ line: recordLine, fields });
    fields = [];
    wasQuoted = false;
  };

  /** A comma ends the field; a line break ends the field and the record. */
  const endFieldAt = (c: number): void => {
    if (c === COMMA) endField();
    else {
      endRecord();
      line++;
      afterCR = c === CR;
    }
    state = State.FieldStart;
  };

  const consume = (text: string): void => {
    let i = 0;
    const n = text.length;
    if (first && n > 0) {
      first = false;
      if (text.charCodeAt(0) === 0xfeff) i = 1;
    }
    for (; i < n; i++) {
      const c = text.charCodeAt(i);
      if (afterCR) {
        afterCR = false;
        if (c === LF && state === State.FieldStart) continue; // the LF of a CRLF that ended a record
      }
      switch (state) {
        case State.FieldStart:
          if (fields.length === 0 && field === '') recordLine = line;
          wasQuoted = c === QUOTE;
          if (c === QUOTE) {
            state = State.Quoted;
            quotedFrom = line;
            break;
          }
          state = State.Unquoted;
          i--; // read this character again as the start of an unquoted field
          break;
        case State.Unquoted: {
          if (c === COMMA || c === LF || c === CR) {
            endFieldAt(c);
          } else if (c === QUOTE) {
            throw new CsvSyntaxError(line, 'a quote inside an unquoted field; quote the whole field and double the quote');
          } else {
            // Copy the run of plain characters at once rather than one by one.
            let j = i + 1;
            while (j < n) {
              const d = text.charCodeAt(j);
              if (d === COMMA || d === LF || d === CR || d === QUOTE) break;
              j++;
            }
            field += text.slice(i, j);
            if (field.length > MAX_FIELD_CHARS) throw new CsvSyntaxError(recordLine, `a field is longer than ${MAX_FIELD_CHARS} characters`);
            i = j - 1;
          }
          break;
        }
        case State.Quoted: {
          if (c === QUOTE) {
            quotedCR = false;
            state = State.QuoteInQuoted;
          } else {
            let j = i;
            while (j < n) {
              const d = text.charCodeAt(j);
              if (d === QUOTE) break;
              // A CRLF inside the field is one line break; quotedCR carries a CR across chunks.
              if (d === CR) line++;
              else if (d === LF && !quotedCR) line++;
              quotedCR = d === CR;
              j++;
            }
            field += text.slice(i, j);
            if (field.length > MAX_FIELD_CHARS) throw new CsvSyntaxError(recordLine, `a field is longer than ${MAX_FIELD_CHARS} characters`);
            i = j - 1;
          }
          break;
        }
        case State.QuoteInQuoted:
          if (c === QUOTE) {
            field += '"';
            state = State.Quoted;
          } else if (c === COMMA || c === LF || c === CR) {
            endFieldAt(c);
          } else {
            throw new CsvSyntaxError(line, `unexpected ${JSON.stringify(text[i])} after a closing quote; a quoted field must end at a comma or a line break`);
          }
          break;
      }
    }
  };

  for await (const chunk of chunks) {
    consume(typeof chunk === 'string' ? chunk : decoder.write(chunk));
    if (out.length > 0) yield* out.splice(0, out.length);
  }
  consume(decoder.end());
  if ((state as State) === State.Quoted) throw new CsvSyntaxError(quotedFrom, 'a quoted field opened here is never closed');
  if ((state as State) !== State.FieldStart || fields.length > 0) endRecord();
  yield* out.splice(0, out.length);
}
