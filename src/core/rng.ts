// Seeded pseudo-random numbers, so that the same seed gives the same bundle byte for byte.
// xoshiro128** (Blackman & Vigna 2018, "Scrambled linear pseudorandom number generators"),
// seeded through splitmix32 so that small consecutive seeds give unrelated streams.

export interface Rng {
  /** Uniform in [0, 1) with 32 random bits. */
  next(): number;
  /** Uniform integer in [0, n). */
  int(n: number): number;
  /** Standard normal deviate (Box-Muller, one of the pair kept). */
  normal(): number;
}

function splitmix32(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x9e3779b9) >>> 0;
    let z = s;
    z = Math.imul(z ^ (z >>> 16), 0x85ebca6b);
    z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35);
    return (z ^ (z >>> 16)) >>> 0;
  };
}

export function createRng(seed: number): Rng {
  if (!Number.isInteger(seed) || seed < 0 || seed > 0xffffffff) {
    throw new RangeError(`seed must be an integer in [0, 4294967295], got ${seed}`);
  }
  const init = splitmix32(seed);
  let a = init();
  let b = init();
  let c = init();
  let d = init();
  if ((a | b | c | d) === 0) a = 1;

  const nextU32 = (): number => {
    const result = Math.imul(rotl(Math.imul(b, 5), 7), 9) >>> 0;
    const t = b << 9;
    c ^= a;
    d ^= b;
    b ^= c;
    a ^= d;
    c ^= t;
    d = rotl(d, 11);
    return result;
  };

  const next = (): number => nextU32() / 4294967296;

  return {
    next,
    int(n: number): number {
      if (!Number.isInteger(n) || n <= 0) throw new RangeError(`int(n) needs a positive integer, got ${n}`);
      // Rejection sampling removes the modulo bias of nextU32() % n.
      const limit = 4294967296 - (4294967296 % n);
      let u = nextU32();
      while (u >= limit) u = nextU32();
      return u % n;
    },
    normal(): number {
      let u = next();
      while (u === 0) u = next();
      const v = next();
      return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * v);
    },
  };
}

function rotl(x: number, k: number): number {
  return (x << k) | (x >>> (32 - k));
}

/** Fisher-Yates shuffle in place (Knuth, TAOCP vol. 2, Algorithm P). */
export function shuffleInPlace<T>(items: T[], rng: Rng): T[] {
  for (let i = items.length - 1; i > 0; i--) {
    const j = rng.int(i + 1);
    const tmp = items[i] as T;
    items[i] = items[j] as T;
    items[j] = tmp;
  }
  return items;
}

/** A seed for an independent stream: the same user seed drives the split, training and sampling. */
export function deriveSeed(seed: number, stream: number): number {
  return (seed + Math.imul(stream, 0x9e3779b9)) >>> 0;
}
