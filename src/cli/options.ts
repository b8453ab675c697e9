import { InvalidArgumentError } from 'commander';

// Flag parsers for commander: each throws InvalidArgumentError, which commander reports with the flag's name.

export function integerIn(min: number, max = Number.MAX_SAFE_INTEGER): (v: string) => number {
  return (v) => {
    const n = Number(v);
    if (!/^[+-]?\d+$/.test(v.trim()) || !Number.isSafeInteger(n) || n < min || n > max) {
      throw new InvalidArgumentError(`expected an integer in [${min}, ${max}]`);
    }
    return n;
  };
}

export function numberIn(min: number, max: number, { exclusiveMin = false } = {}): (v: string) => number {
  return (v) => {
    const n = Number(v);
    if (v.trim() === '' || !Number.isFinite(n) || n < min || n > max || (exclusiveMin && n === min)) {
      throw new InvalidArgumentError(`expected a number in ${exclusiveMin ? '(' : '['}${min}, ${max}]`);
    }
    return n;
  };
}

export function list(v: string): string[] {
  const items = v.split(',').map((s) => s.trim());
  if (items.some((s) => s === '')) throw new InvalidArgumentError('expected a comma-separated list without empty items');
  return items;
}

export function integerList(min: number, max: number): (v: string) => number[] {
  const one = integerIn(min, max);
  return (v) => list(v).map(one);
}

export function oneOf<T extends string>(values: readonly T[]): (v: string) => T {
  return (v) => {
    if (!(values as readonly string[]).includes(v)) throw new InvalidArgumentError(`expected one of ${values.join(', ')}`);
    return v as T;
  };
}

/** A comma-separated subset of values, each named once; "none" for the empty list. */
export function listOf<T extends string>(values: readonly T[]): (v: string) => T[] {
  return (v) => {
    if (v.trim() === 'none') return [];
    const items = list(v);
    const bad = items.filter((i) => !(values as readonly string[]).includes(i));
    if (bad.length > 0) throw new InvalidArgumentError(`${bad.join(', ')} ${bad.length === 1 ? 'is' : 'are'} not one of ${values.join(', ')} (or none)`);
    return [...new Set(items)] as T[];
  };
}

/**
 * An ISO 8601 date or date-time. A date is midnight UTC; a date-time without an offset is UTC
 * too, not the machine's local time as Date.parse would read it.
 */
export function isoTime(v: string): Date {
  const m = /^\d{4}-\d{2}-\d{2}(T\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:\d{2})?)?$/.exec(v);
  const t = m ? Date.parse(m[1] !== undefined && m[4] === undefined ? `${v}Z` : v) : Number.NaN;
  if (Number.isNaN(t)) throw new InvalidArgumentError('expected an ISO 8601 date or date-time, e.g. 2026-11-30 or 2026-11-30T06:00:00Z (UTC unless an offset is given)');
  return new Date(t);
}
