import { InvalidArgumentError } from 'commander';
import { describe, expect, it, onTestFinished } from 'vitest';
import { isoTime } from '../../src/cli/options.js';

describe('isoTime flag parser', () => {
  it('reads a date, and a date-time without an offset, as UTC whatever the machine time zone', () => {
    // Node follows changes to TZ at run time; a zone off UTC would show a local reading.
    const tz = process.env.TZ;
    process.env.TZ = 'America/Chicago';
    expect(new Date(2026, 10, 30).getTimezoneOffset()).toBe(360);
    onTestFinished(() => {
      if (tz === undefined) delete process.env.TZ;
      else process.env.TZ = tz;
    });
    expect(isoTime('2026-11-30').toISOString()).toBe('2026-11-30T00:00:00.000Z');
    expect(isoTime('2026-11-30T06:00').toISOString()).toBe('2026-11-30T06:00:00.000Z');
    expect(isoTime('2026-11-30T06:00:30.250').toISOString()).toBe('2026-11-30T06:00:30.250Z');
  });

  it('keeps an offset that is given', () => {
    expect(isoTime('2026-11-30T06:00:00+01:00').toISOString()).toBe('2026-11-30T05:00:00.000Z');
    expect(isoTime('2026-11-30T06:00:00Z').toISOString()).toBe('2026-11-30T06:00:00.000Z');
  });

  it('refuses what is not ISO 8601', () => {
    for (const bad of ['yesterday', '30/11/2026', '2026-11-30 06:00', '2026-13-45', '']) expect(() => isoTime(bad)).toThrow(InvalidArgumentError);
  });
});
