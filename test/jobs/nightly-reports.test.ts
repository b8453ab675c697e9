import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { pino } from 'pino';
import { previousDayWindow, startNightlyReports } from '../../src/jobs/nightly-reports.js';
import { DAY_END, DAY_START, demoDayService } from '../helpers/demo.js';
import type { TestService } from '../helpers/service.js';

describe('the previous day', () => {
  it('runs from midnight to midnight in UTC', () => {
    const w = previousDayWindow(new Date('2026-12-01T02:00:00Z'), 'UTC');
    expect([new Date(w.from).toISOString(), new Date(w.to).toISOString()]).toEqual(['2026-11-30T00:00:00.000Z', '2026-12-01T00:00:00.000Z']);
  });

  it('follows the time zone, including a 23-hour day when clocks go forward (Europe/Berlin, 29 March 2026)', () => {
    const w = previousDayWindow(new Date('2026-03-30T02:00:00Z'), 'Europe/Berlin');
    expect([new Date(w.from).toISOString(), new Date(w.to).toISOString()]).toEqual(['2026-03-28T23:00:00.000Z', '2026-03-29T22:00:00.000Z']);
    expect((w.to - w.from) / 3_600_000).toBe(23);
  });
});

describe('nightly drift reports', () => {
  let svc: TestService;
  beforeAll(async () => {
    svc = await demoDayService();
  });
  afterAll(async () => {
    await svc.close();
  });

  it('make one report per loaded model for the previous day, once', async () => {
    // The clock stands at 02:00 after the demo day, so that the run made good at start is the
    // demo day's too, whatever day the test runs on.
    const job = startNightlyReports({
      registry: svc.registry,
      reports: svc.app.reports,
      drift: svc.store.drift,
      schedule: '0 2 * * *',
      timezone: 'UTC',
      log: pino({ level: 'silent' }),
      now: () => new Date(DAY_END + 2 * 3_600_000 + 60_000),
    });
    await job.runFor(new Date(DAY_END + 2 * 3_600_000));
    await job.runFor(new Date(DAY_END + 2 * 3_600_000));
    await job.stop();
    const rows = svc.rows("SELECT model_name, trigger, window_from, window_to FROM drift_reports WHERE trigger = 'nightly'");
    expect(rows).toEqual([{ model_name: 'moulding-quality', trigger: 'nightly', window_from: DAY_START, window_to: DAY_END }]);
  });

  it('make good, at start, the last scheduled run that found no report (the server was down)', async () => {
    // A schedule that last fired at the start of this minute, over a time zone where "yesterday"
    // is a window this database has not reported on yet.
    const before = svc.rows('SELECT id FROM drift_reports').length;
    const job = startNightlyReports({ registry: svc.registry, reports: svc.app.reports, drift: svc.store.drift, schedule: '* * * * *', timezone: 'Pacific/Kiritimati', log: pino({ level: 'silent' }) });
    await job.stop();
    expect(svc.rows('SELECT id FROM drift_reports').length).toBe(before + 1);
  });
});
