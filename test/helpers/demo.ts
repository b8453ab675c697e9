import { readFileSync } from 'node:fs';
import { parseBundle } from '../../src/bundle/verify.js';
import { replayDemoDay } from '../../src/demo/replay.js';
import { type TestService, startTestService } from './service.js';

export const DEMO_DIR = new URL('../../demo-data/', import.meta.url).pathname;
export const DAY_START = Date.parse('2026-11-30T00:00:00Z');
export const DAY_END = DAY_START + 86_400_000;

export function demoBundle() {
  return parseBundle(readFileSync(`${DEMO_DIR}models/moulding-quality.bundle.json`, 'utf8'), 'demo').file;
}

/** A fresh service on the demo bundle with the invented day of demo traffic replayed into it. */
export async function demoDayService(config: Record<string, unknown> = {}): Promise<TestService> {
  const svc = await startTestService({ bundles: [demoBundle()], config });
  await replayDemoDay(svc.app.scoring, 'moulding-quality', DEMO_DIR, DAY_START);
  return svc;
}
