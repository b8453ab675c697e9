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
});
