import { join } from 'node:path';
import { openCsv } from '../io/csv.js';
import { parseFeatures, planColumns } from '../io/feature-table.js';
import { uuidv7At } from '../ids.js';
import type { ScoringService } from '../scoring/service.js';

const HOUR = 3_600_000;

/** One stretch of the invented day: rows of a traffic file spread evenly over [fromHour, toHour). */
export interface Stretch {
  file: string;
  first: number;
  count: number;
  fromHour: number;
  toHour: number;
  story: string;
}

/**
 * The demo's invented day at moulding cell 3: a normal morning, a resin-lot change at noon that
 * the setter answers with a hotter barrel, and at 18:00 an hour in which the cushion transducer
 * reads 0 mm before it is replaced (demo-data/README.md tells the story).
 */
export const DEMO_DAY: Stretch[] = [
  { file: 'traffic-normal.csv', first: 0, count: 1000, fromHour: 0, toHour: 12, story: 'normal production' },
  { file: 'traffic-drifted.csv', first: 0, count: 500, fromHour: 12, toHour: 18, story: 'new resin lot, barrel 7 degC hotter' },
  { file: 'traffic-faulted.csv', first: 0, count: 83, fromHour: 18, toHour: 19, story: 'cushion transducer stuck at 0 mm' },
  { file: 'traffic-drifted.csv', first: 500, count: 416, fromHour: 19, toHour: 24, story: 'new resin lot, transducer replaced' },
];

/** One replayed shot: its answer, and what the invented data says the part was. */
export interface ReplayedShot {
  shot: string;
  requestId: string;
  receivedAt: number;
  answered: string;
  outcome: string;
  inDomain: boolean;
}

export interface ReplaySummary {
  scored: number;
  outOfDomain: number;
  byStretch: Array<Stretch & { outOfDomain: number }>;
  /** Every shot in the order of the day. */
  shots: ReplayedShot[];
}

/**
 * Scores the demo traffic through the scoring service, as the plant-floor app would, but with
 * each request stamped at its time in the invented day starting at dayStart (Unix ms, UTC).
 */
export async function replayDemoDay(scoring: ScoringService, model: string, dir: string, dayStart: number, day: Stretch[] = DEMO_DAY): Promise<ReplaySummary> {
  const summary: ReplaySummary = { scored: 0, outOfDomain: 0, byStretch: [], shots: [] };
  for (const stretch of day) {
    const csv = await openCsv(join(dir, stretch.file));
    const features = ['melt_temp_c', 'mould_temp_c', 'injection_pressure_bar', 'hold_pressure_bar', 'hold_time_s', 'cooling_time_s', 'screw_speed_rpm', 'cushion_mm', 'cycle_time_s', 'shot_weight_g'];
    const plan = planColumns(csv.header, stretch.file, { features }, csv.headerLine);
    const step = ((stretch.toHour - stretch.fromHour) * HOUR) / stretch.count;
    const outcomeColumn = csv.header.indexOf('outcome');
    const pending: Array<Promise<ReplayedShot>> = [];
    let index = 0;
    for await (const row of csv.rows) {
      if (index >= stretch.first && index < stretch.first + stretch.count) {
        const x = new Float64Array(features.length);
        parseFeatures(row.fields, row.line, plan, stretch.file, x, 0);
        const receivedAt = Math.round(dayStart + stretch.fromHour * HOUR + (index - stretch.first) * step);
        const shot = row.fields[0] ?? '';
        const outcome = row.fields[outcomeColumn] ?? '';
        pending.push(
          scoring
            .scoreOne(model, { features: Array.from(x), tags: { line: '3', cell: 'moulding-3', shot } }, { requestId: uuidv7At(receivedAt), receivedAt, elapsedMs: () => 0 })
            .then((a) => ({ shot, requestId: a.request_id, receivedAt, answered: a.label, outcome, inDomain: a.domain.in_domain })),
        );
      }
      index++;
    }
    const shots = await Promise.all(pending);
    const ood = shots.filter((s) => !s.inDomain).length;
    summary.shots.push(...shots);
    summary.scored += shots.length;
    summary.outOfDomain += ood;
    summary.byStretch.push({ ...stretch, outOfDomain: ood });
  }
  return summary;
}
