// What JSON.parse does not say about a body: a name given twice in one object (JSON.parse keeps
// the last value), a string holding a lone surrogate escape (it has no UTF-8 form, so it could
// not be stored as sent), and where in the document a given character lies. RFC 8259: names
// within an object SHOULD be unique (section 4), and with duplicates "the behavior of software
// that receives such an object is unpredictable"; strings with lone surrogates likewise
// (section 8.2). A scoring audit must not guess, so both are refused, with a JSON Pointer.
//
// One pass over the text, without recursion (a body may nest 100,000 deep), keeping for each
// open object the names seen in it.

/** The one detail for text that is not well-formed Unicode, whether bytes or escapes made it so. */
export const NOT_WELL_FORMED = 'must be well-formed Unicode: valid UTF-8, and no lone surrogate escape such as \\ud800';

export type JsonPath = Array<string | number>;

export type ScanFinding = { kind: 'duplicate'; path: JsonPath } | { kind: 'lone-surrogate'; path: JsonPath };

interface Frame {
  object: boolean;
  /** Names seen so far in this object: a list while short, a Set past SMALL. */
  names: string[] | Set<string> | null;
  /** The current name (objects) or index (arrays). */
  at: string | number;
  /** In an object: the next string is a name. */
  expectName: boolean;
}

/** A lone UTF-16 surrogate (from a "\ud800" escape): it has no UTF-8 form, so it could not be stored as sent. */
export const LONE_SURROGATE = /[\ud800-\udbff](?![\udc00-\udfff])|(?<![\ud800-\udbff])[\udc00-\udfff]/;
const LONE_SURROGATES = new RegExp(LONE_SURROGATE.source, 'g');
const SURROGATE_ESCAPE = /\\u[dD][89a-fA-F]/;

const QUOTE = 0x22;
const BACKSLASH = 0x5c;

/** The index of the quote that closes the string opening at `start`, or -1. */
function stringEnd(text: string, start: number): number {
  let i = start + 1;
  for (;;) {
    const q = text.indexOf('"', i);
    if (q < 0) return -1;
    let slashes = 0;
    for (let k = q - 1; k > start && text.charCodeAt(k) === BACKSLASH; k--) slashes++;
    if (slashes % 2 === 0) return q;
    i = q + 1;
  }
}

/** Past this many names an object's are kept in a Set; below it a list is faster to make and search. */
const SMALL = 16;

/** Records `name` in the object; true when it was there already. */
function seenBefore(frame: Frame, name: string): boolean {
  const names = frame.names;
  if (names === null) {
    frame.names = [name];
    return false;
  }
  if (Array.isArray(names)) {
    if (names.includes(name)) return true;
    names.push(name);
    if (names.length > SMALL) frame.names = new Set(names);
    return false;
  }
  if (names.has(name)) return true;
  names.add(name);
  return false;
}

/** A path for a message: lone surrogates shown as U+FFFD, so that the pointer can be written. */
const readable = (path: JsonPath): JsonPath => path.map((p) => (typeof p === 'string' ? p.replace(LONE_SURROGATES, '\uFFFD') : p));

/**
 * Walks JSON text and returns the first name given twice in one object, or the first string
 * (name or value) holding a lone surrogate; null when there is neither. With `locate`, returns
 * instead the path of the string that covers that character index (`kind` 'lone-surrogate'
 * stands for "not well-formed there"), or null when it lies in no string or the text cannot be
 * walked.
 */
export function scanJson(text: string, locate?: number): ScanFinding | null {
  const stack: Frame[] = [];
  const path = (): JsonPath => readable(stack.map((f) => f.at));
  const n = text.length;
  let i = 0;
  let nextSlash = -1;
  while (i < n) {
    const c = text.charCodeAt(i);
    if (c === QUOTE) {
      const end = stringEnd(text, i);
      if (end < 0) return null;
      const top = stack[stack.length - 1];
      const isName = top !== undefined && top.object && top.expectName;
      // The next backslash, found again only once passed: one sweep of the text in all.
      if (nextSlash <= i) {
        const found = text.indexOf('\\', i + 1);
        nextSlash = found < 0 ? Number.POSITIVE_INFINITY : found;
      }
      const escaped = nextSlash < end;
      // Values are read only when escaped (a surrogate escape may hide there); names always.
      let value = '';
      if (escaped) {
        try {
          value = JSON.parse(text.slice(i, end + 1)) as string;
        } catch {
          return null;
        }
      } else if (isName) value = text.slice(i + 1, end);
      if (isName) top.at = value;
      if (locate !== undefined) {
        if (locate >= i && locate <= end) return { kind: 'lone-surrogate', path: path() };
      } else {
        if (escaped && SURROGATE_ESCAPE.test(text.slice(i + 1, end)) && LONE_SURROGATE.test(value)) return { kind: 'lone-surrogate', path: path() };
        if (isName && seenBefore(top, value)) return { kind: 'duplicate', path: path() };
      }
      i = end + 1;
      continue;
    }
    switch (c) {
      case 0x7b: // {
        stack.push({ object: true, names: null, at: '', expectName: true });
        break;
      case 0x5b: // [
        stack.push({ object: false, names: null, at: 0, expectName: false });
        break;
      case 0x7d: // }
      case 0x5d: // ]
        stack.pop();
        break;
      case 0x2c: {
        // ,
        const top = stack[stack.length - 1];
        if (top?.object) top.expectName = true;
        else if (top) top.at = (top.at as number) + 1;
        break;
      }
      case 0x3a: {
        // :
        const top = stack[stack.length - 1];
        if (top) top.expectName = false;
        break;
      }
      default:
        break;
    }
    i++;
  }
  return null;
}

/**
 * False when `text`, which parsed to `value`, surely holds neither a name given twice nor a lone
 * surrogate escape, so that scanJson need not walk it; true when it might. Every name in JSON text
 * is a string closed by a quote that whitespace and a colon follow, so the text holds at least as
 * many such quote-colons as names, and a name given twice leaves the parsed value with fewer names
 * than the text: when the two counts are equal no name was given twice. A quote-colon inside a
 * string value only makes the count larger, and sends the text to the full scan.
 */
export function mayNeedScan(text: string, value: unknown): boolean {
  if (SURROGATE_ESCAPE.test(text)) return true;
  return quoteColons(text) !== namesIn(value);
}

function quoteColons(text: string): number {
  let count = 0;
  for (let at = text.indexOf(':'); at >= 0; at = text.indexOf(':', at + 1)) {
    let k = at - 1;
    for (let c = text.charCodeAt(k); c === 0x20 || c === 0x09 || c === 0x0a || c === 0x0d; c = text.charCodeAt(--k));
    if (text.charCodeAt(k) === QUOTE) count++;
  }
  return count;
}

/** The names of every object in a parsed value, walked without recursion (a body may nest deep). */
function namesIn(value: unknown): number {
  let count = 0;
  const stack: unknown[] = [value];
  while (stack.length > 0) {
    const v = stack.pop();
    if (typeof v !== 'object' || v === null) continue;
    if (Array.isArray(v)) {
      for (const x of v) if (typeof x === 'object' && x !== null) stack.push(x);
      continue;
    }
    for (const k in v) {
      count++;
      const x = (v as Record<string, unknown>)[k];
      if (typeof x === 'object' && x !== null) stack.push(x);
    }
  }
  return count;
}

/** Where UTF-8 stops being valid in `bytes` (RFC 3629, section 4), or -1 when it is valid throughout. */
export function firstInvalidUtf8(bytes: Uint8Array): number {
  const n = bytes.length;
  let i = 0;
  while (i < n) {
    const b = bytes[i] as number;
    if (b < 0x80) {
      i++;
      continue;
    }
    let need: number;
    let lo = 0x80;
    let hi = 0xbf;
    if (b >= 0xc2 && b <= 0xdf) need = 1;
    else if (b >= 0xe0 && b <= 0xef) {
      need = 2;
      if (b === 0xe0) lo = 0xa0; // no overlong forms
      if (b === 0xed) hi = 0x9f; // no surrogates
    } else if (b >= 0xf0 && b <= 0xf4) {
      need = 3;
      if (b === 0xf0) lo = 0x90;
      if (b === 0xf4) hi = 0x8f; // nothing above U+10FFFF
    } else return i;
    if (i + need >= n) return i;
    const second = bytes[i + 1];
    if (second === undefined || second < lo || second > hi) return i;
    for (let k = 2; k <= need; k++) {
      const next = bytes[i + k];
      if (next === undefined || next < 0x80 || next > 0xbf) return i;
    }
    i += need + 1;
  }
  return -1;
}
