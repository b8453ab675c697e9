// Rebuilds the demo data and the demo bundle: `npm run demo:build [-- OUT_DIR]`.
// Deterministic: the same code gives the same bytes, so a test can rebuild and compare.
import { mkdir, writeFile } from 'node:fs/promises';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { fileURLToPath } from 'node:url';
import { trainAction } from '../src/cli/actions/train.js';
import { TRAIN_DEFAULTS } from '../src/cli/commands/train.js';
import { FEATURES, makeCsv } from './generator.js';

/** The demo's files, each with its seed and scenario (README.md tells the story of each). */
export const DEMO_FILES = {
  'training.csv': { rows: 5000, seed: 1, scenario: {}, prefix: 'C3' },
  'traffic-normal.csv': { rows: 1000, seed: 2, scenario: {}, prefix: 'C3N' },
  // After a resin-lot change the setter raises the barrel by 7 degC; the hotter melt flashes more often.
  'traffic-drifted.csv': { rows: 1000, seed: 3, scenario: { shift: { melt_temp_c: 7 } }, prefix: 'C3D' },
  // The cushion position transducer fails and reads 0.00 mm on every shot.
  'traffic-faulted.csv': { rows: 1000, seed: 4, scenario: { stuck: { cushion_mm: 0 } }, prefix: 'C3F' },
} as const;

export const DEMO_BUNDLE = { name: 'moulding-quality', version: '1', createdAt: new Date('2026-11-02T06:00:00Z') } as const;

const here = fileURLToPath(new URL('.', import.meta.url));

const quiet = (): Writable => new Writable({ write: (_c, _e, cb) => cb() });

export async function buildDemo(outDir: string, log: Writable = quiet()): Promise<void> {
  await mkdir(join(outDir, 'models'), { recursive: true });
  for (const [file, spec] of Object.entries(DEMO_FILES)) {
    await writeFile(join(outDir, file), makeCsv(spec.rows, spec.seed, spec.scenario, spec.prefix));
  }
  await trainAction(
    {
      ...TRAIN_DEFAULTS,
      data: join(outDir, 'training.csv'),
      label: 'outcome',
      features: [...FEATURES],
      featureInfo: join(here, 'features.json'),
      name: DEMO_BUNDLE.name,
      version: DEMO_BUNDLE.version,
      out: join(outDir, 'models', `${DEMO_BUNDLE.name}.bundle.json`),
      detectors: [...TRAIN_DEFAULTS.detectors],
      createdAt: DEMO_BUNDLE.createdAt,
    },
    { stdout: log, stderr: quiet(), interactive: false },
  );
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  await buildDemo(process.argv[2] ?? here, process.stdout);
}
