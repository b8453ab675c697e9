import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { recordDemoOutcomes } from '../../src/demo/outcomes.js';
import { type ReplaySummary, replayDemoDay } from '../../src/demo/replay.js';
import { DAY_END, DAY_START, DEMO_DIR, demoBundle } from '../helpers/demo.js';
import { type TestService, startTestService } from '../helpers/service.js';

// The signals on outcomes: accuracy (held to min_labelled) and labelled_rate, over the answers
// received in the window and the outcomes recorded for them by the time of the check.

let svc: TestService;
let day: ReplaySummary;
beforeAll(async () => {
  svc = await startTestService({
    bundles: [demoBundle()],
    config: {
      alerts: {
        rules: [
          { name: 'accuracy-low', model: '*', signal: 'accuracy', window: '1d', below: 0.9, min_labelled: 30 },
          { name: 'accuracy-thin', model: '*', signal: 'accuracy', window: '1d', below: 0.9, min_labelled: 1000 },
          { name: 'few-outcomes', model: '*', signal: 'labelled_rate', window: '1d', below: 0.2 },
        ],
      },
    },
  });
  day = await replayDemoDay(svc.app.scoring, 'moulding-quality', DEMO_DIR, DAY_START);
}, 60_000);
afterAll(async () => {
  await svc.close();
});

const state = (rule: string) => svc.app.alerting.evaluator.states().find((s) => s.rule === rule);

describe('alert signals on outcomes', () => {
  it('before any outcome: no accuracy to judge, and a labelled rate of 0 raises its rule', async () => {
    await svc.app.alerting.tick(DAY_END);
    expect(state('accuracy-low')).toMatchObject({ phase: 'quiet', value: null, requests: 0 });
    expect(state('few-outcomes')).toMatchObject({ phase: 'raised', value: 0, requests: 1999 });
  });

  it('once a third of the shots have outcomes: accuracy below 0.9 raises, min_labelled holds a thin count back, and the labelled rate is the share with an outcome', async () => {
    await recordDemoOutcomes(svc.store.outcomes, 'moulding-quality', day.shots);
    // counted here from the replay's own record of each shot, not from the store
    const inspected = day.shots.filter((_, i) => i % 3 === 2);
    const right = inspected.filter((s) => s.answered === s.outcome).length;
    await svc.app.alerting.tick(DAY_END);
    expect(state('accuracy-low')).toMatchObject({ phase: 'raised', requests: inspected.length });
    expect(state('accuracy-low')?.value).toBeCloseTo(right / inspected.length, 14);
    expect(state('accuracy-thin')).toMatchObject({ phase: 'quiet', value: null, requests: inspected.length });
    expect(state('few-outcomes')?.value).toBeCloseTo(inspected.length / 1999, 14);
    // above 0.2 now: the alert stays raised until the condition has been false for a whole window
    expect(state('few-outcomes')?.phase).toBe('raised');
  });

  it('refuses min_labelled below 1 and an unknown signal in the configuration, naming the field', async () => {
    const { configSchema } = await import('../../src/config/config.js');
    const bad = configSchema.safeParse({ alerts: { rules: [{ name: 'x', model: '*', signal: 'accuracy', below: 0.9, min_labelled: 0 }, { name: 'y', model: '*', signal: 'precision', below: 0.9 }] } });
    expect(bad.error?.issues.map((i) => i.path.join('.'))).toEqual(['alerts.rules.0.min_labelled', 'alerts.rules.1.signal']);
  });
});
