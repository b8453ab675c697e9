// Invented process data for the demo: an injection-moulding cell making a polypropylene housing.
// The rules are documented in demo-data/README.md; nothing here is measured from a real line.
import { type Rng, createRng } from '../src/core/rng.js';

export const CLASSES = ['good', 'short_shot', 'flash', 'sink_marks', 'warpage'] as const;
export type Outcome = (typeof CLASSES)[number];

/** Set points and shot-to-shot spread (standard deviation) of the measured process variables. */
export const PROCESS = {
  melt_temp_c: { mean: 232, sd: 3.5, decimals: 1 },
  mould_temp_c: { mean: 55, sd: 2.5, decimals: 1 },
  injection_pressure_bar: { mean: 880, sd: 35, decimals: 0 },
  hold_pressure_bar: { mean: 520, sd: 30, decimals: 0 },
  hold_time_s: { mean: 3.2, sd: 0.3, decimals: 2 },
  cooling_time_s: { mean: 14, sd: 1, decimals: 2 },
  screw_speed_rpm: { mean: 110, sd: 8, decimals: 0 },
  cushion_mm: { mean: 5.5, sd: 0.6, decimals: 2 },
} as const;

export const FEATURES = [...Object.keys(PROCESS), 'cycle_time_s', 'shot_weight_g'] as const;

/** Thresholds on the latent quality indices (each standard normal); see README.md. */
export const RULES = { shortShotBelow: -1.35, flashAbove: 1.45, sinkBelow: -1.35, warpBelow: -1.35 } as const;

export interface Scenario {
  /** Added to a variable before the shot is made (a set-point change or a material effect). */
  shift?: Partial<Record<keyof typeof PROCESS, number>>;
  /** Variables whose sensor reads this value whatever the process does (a stuck transducer). */
  stuck?: Partial<Record<(typeof FEATURES)[number], number>>;
}

export interface Shot {
  values: Record<(typeof FEATURES)[number], number>;
  outcome: Outcome;
}

const round = (v: number, decimals: number): number => Number(v.toFixed(decimals));

/** Weighted sum of standard normals, rescaled to unit variance. */
function index(terms: Array<[number, number]>): number {
  let s = 0;
  let w2 = 0;
  for (const [w, z] of terms) {
    s += w * z;
    w2 += w * w;
  }
  return s / Math.sqrt(w2);
}

export function makeShot(rng: Rng, scenario: Scenario = {}): Shot {
  const z = {} as Record<keyof typeof PROCESS, number>;
  const v = {} as Record<(typeof FEATURES)[number], number>;
  for (const [name, p] of Object.entries(PROCESS) as Array<[keyof typeof PROCESS, (typeof PROCESS)[keyof typeof PROCESS]]>) {
    const value = p.mean + p.sd * rng.normal() + (scenario.shift?.[name] ?? 0);
    v[name] = round(value, p.decimals);
    z[name] = (value - p.mean) / p.sd;
  }
  // Unmeasured shot-to-shot effects: resin viscosity, packing losses, ejection temperature.
  const fill = index([[0.6, z.melt_temp_c], [0.6, z.injection_pressure_bar], [0.3, z.mould_temp_c], [0.25, rng.normal()]]);
  const pack = index([[0.6, z.hold_pressure_bar], [0.5, z.hold_time_s], [0.4, z.cushion_mm], [0.25, rng.normal()]]);
  const cool = index([[0.7, z.cooling_time_s], [-0.5, z.mould_temp_c], [0.25, rng.normal()]]);
  const outcome: Outcome =
    fill < RULES.shortShotBelow ? 'short_shot'
    : fill > RULES.flashAbove ? 'flash'
    : pack < RULES.sinkBelow ? 'sink_marks'
    : cool < RULES.warpBelow ? 'warpage'
    : 'good';
  const cycle = 2.1 + (v.hold_time_s as number) + (v.cooling_time_s as number) + 4 + 0.25 * rng.normal();
  v.cycle_time_s = round(cycle, 2);
  v.shot_weight_g = round(48 + 0.35 * fill + 0.25 * pack + 0.1 * rng.normal(), 2);
  for (const [name, reading] of Object.entries(scenario.stuck ?? {})) v[name as (typeof FEATURES)[number]] = reading as number;
  return { values: v, outcome };
}

/** CSV text of `rows` shots: shot_id, the features, outcome. */
export function makeCsv(rows: number, seed: number, scenario: Scenario = {}, idPrefix = 'C3'): string {
  const rng = createRng(seed);
  const lines = [['shot_id', ...FEATURES, 'outcome'].join(',')];
  for (let i = 1; i <= rows; i++) {
    const shot = makeShot(rng, scenario);
    lines.push([`${idPrefix}-${String(i).padStart(6, '0')}`, ...FEATURES.map((f) => String(shot.values[f])), shot.outcome].join(','));
  }
  return `${lines.join('\n')}\n`;
}
