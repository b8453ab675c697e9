import { describe, expect, it } from 'vitest';
import { createRateWindow } from '../../src/http/rate-window.js';

describe('the rate window', () => {
  it('passes the first max requests of a key in a window and refuses the rest until it ends', () => {
    const w = createRateWindow(3, 60_000);
    const at = (t: number) => w.take('a', t);
    expect([at(0), at(10), at(20)].map((v) => [v.allowed, v.remaining])).toEqual([[true, 2], [true, 1], [true, 0]]);
    const refused = at(30_000);
    expect(refused).toEqual({ allowed: false, limit: 3, remaining: 0, resetMs: 30_000 });
    expect(at(59_999).allowed).toBe(false);
    // the window opened at 0 ends at 60,000: a new one opens with a full budget
    expect(at(60_000)).toEqual({ allowed: true, limit: 3, remaining: 2, resetMs: 60_000 });
  });

  it('keeps each key apart', () => {
    const w = createRateWindow(1, 1000);
    expect(w.take('a', 0).allowed).toBe(true);
    expect(w.take('a', 1).allowed).toBe(false);
    expect(w.take('b', 2).allowed).toBe(true);
  });

  it('holds at most maxKeys windows, dropping ended ones first, then the oldest', () => {
    const w = createRateWindow(5, 1000, { maxKeys: 3 });
    w.take('a', 0);
    w.take('b', 0);
    w.take('c', 500);
    expect(w.size).toBe(3);
    // at 1,200 the windows of a and b (opened at 0) have ended and make room; c's has not
    w.take('d', 1200);
    expect(w.size).toBe(2);
    w.take('e', 1300);
    expect(w.size).toBe(3);
    // full, and none has ended: the oldest opened (c) is dropped
    w.take('f', 1400);
    expect(w.size).toBe(3);
    expect(w.take('c', 1450).remaining).toBe(4);
  });
});
