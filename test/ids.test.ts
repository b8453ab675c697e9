import { describe, expect, it } from 'vitest';
import { UUID_V7, uuidv7, uuidv7At } from '../src/ids.js';

const msOf = (id: string): number => Number.parseInt(id.replace(/-/g, '').slice(0, 12), 16);

describe('UUID version 7 (RFC 9562)', () => {
  it('puts the Unix milliseconds in the first 48 bits, as in the RFC 9562 appendix A.6 example', () => {
    // RFC 9562 A.6 (example recalled from memory): 2:22:22 PM GMT-05:00 on 2022-02-22 is unix_ts_ms
    // 0x017F22E279B0, and its id begins 017F22E2-79B0-7.
    const ms = Date.parse('2022-02-22T14:22:22-05:00');
    expect(ms).toBe(0x017f22e279b0);
    const id = uuidv7At(ms);
    expect(id).toMatch(UUID_V7);
    expect(id.slice(0, 15)).toBe('017f22e2-79b0-7');
    // uuidv7 itself never goes back in time: the same moment after a later id sorts after it
    expect(uuidv7(ms) > uuidv7()).toBe(false);
  });

  it('sorts ids made in the same millisecond in the order they were made', () => {
    const now = Date.now() + 10_000;
    const ids = Array.from({ length: 5000 }, () => uuidv7(now));
    expect([...ids].sort()).toEqual(ids);
    expect(new Set(ids).size).toBe(ids.length);
  });

  it('stamps a replayed time without disturbing the order of ids made now', () => {
    const before = uuidv7();
    const old = uuidv7At(Date.parse('2026-11-30T06:00:00Z'));
    const after = uuidv7();
    expect(msOf(old)).toBe(Date.parse('2026-11-30T06:00:00Z'));
    expect(after > before).toBe(true);
  });

  it('counts ids of one millisecond in rand_a, one apart, under version 7 and variant 0b10 (RFC 9562, 5.7 and 6.2 method 1)', () => {
    const now = Date.now() + 20_000;
    const ids = Array.from({ length: 300 }, () => uuidv7(now));
    const randA = ids.map((id) => Number.parseInt(id.slice(15, 18), 16));
    for (let i = 1; i < randA.length; i++) expect(randA[i]).toBe((randA[i - 1] as number) + 1);
    for (const id of ids) {
      expect(msOf(id)).toBe(now);
      expect(id[14]).toBe('7');
      expect(Number.parseInt(id[19] as string, 16) >> 2).toBe(0b10);
    }
    // the 62 random bits differ from id to id
    expect(new Set(ids.map((id) => id.slice(19))).size).toBe(ids.length);
  });
});
