import { randomFillSync } from 'node:crypto';

let lastMs = -1;
let counter = 0;

// Random bytes are drawn from the CSPRNG 4 KiB at a time and handed out 8 or 2 at a time: one
// call per ~500 ids instead of one per id.
const POOL = new Uint8Array(4096);
let poolAt = POOL.length;
function randomBytes(n: number): Uint8Array {
  if (poolAt + n > POOL.length) {
    randomFillSync(POOL);
    poolAt = 0;
  }
  const out = POOL.subarray(poolAt, poolAt + n);
  poolAt += n;
  return out;
}

/**
 * UUID version 7 (RFC 9562, section 5.7): 48-bit Unix milliseconds, then a 12-bit counter in
 * rand_a (method 1 of section 6.2) so that ids made in the same millisecond still sort in the
 * order they were made, then 62 random bits.
 */
export function uuidv7(now: number = Date.now()): string {
  let ms = now;
  if (ms <= lastMs) {
    ms = lastMs;
    counter++;
    if (counter > 0xfff) {
      // Counter exhausted within one millisecond: borrow the next millisecond (RFC 9562, 6.2).
      ms = lastMs + 1;
      counter = 0;
    }
  } else {
    counter = 0;
  }
  lastMs = ms;
  return format(ms, counter);
}

/**
 * A UUID version 7 stamped with a given time, such as a replayed request's: rand_a is random,
 * and the id does not take part in uuidv7's ordering of ids made now.
 */
export function uuidv7At(ms: number): string {
  const r = randomBytes(2);
  return format(Math.round(ms), (((r[0] as number) << 8) | (r[1] as number)) & 0xfff);
}

const HEX = Array.from({ length: 256 }, (_, i) => i.toString(16).padStart(2, '0'));
/** rand_a as three hex digits, behind the version digit. */
const RAND_A = Array.from({ length: 4096 }, (_, i) => i.toString(16).padStart(3, '0'));

/** The text before rand_a, the same for every id of one millisecond: made once per millisecond. */
let prefixMs = -1;
let prefix = '';

/** The id's text from its fields, two hex digits a byte from a table: no byte array, no Buffer. */
function format(ms: number, randA: number): string {
  if (ms !== prefixMs) {
    const t = ms.toString(16).padStart(12, '0');
    // version 7 in the high nibble of byte 6
    prefix = `${t.slice(0, 8)}-${t.slice(8)}-7`;
    prefixMs = ms;
  }
  const r = randomBytes(8);
  // the 12 bits of rand_a; the variant (0b10) in the high bits of byte 8, then 62 random bits
  return `${prefix}${RAND_A[randA]}-${HEX[0x80 | ((r[0] as number) & 0x3f)]}${HEX[r[1] as number]}-${HEX[r[2] as number]}${HEX[r[3] as number]}${HEX[r[4] as number]}${HEX[r[5] as number]}${HEX[r[6] as number]}${HEX[r[7] as number]}`;
}

export const UUID_V7 = /^[0-9a-f]{8}-[0-9a-f]{4}-7[0-9a-f]{3}-[89ab][0-9a-f]{3}-[0-9a-f]{12}$/;
