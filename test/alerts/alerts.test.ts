import { join } from 'node:path';
import { afterAll, afterEach, beforeEach, describe, expect, it } from 'vitest';
import { configSchema } from '../../src/config/config.js';
import { type RunningServer, startServer } from '../../src/http/server.js';
import { uuidv7 } from '../../src/ids.js';
import { tempDir } from '../helpers/datasets.js';
import { DEMO_DIR } from '../helpers/demo.js';
import { startReceiver, verifyStandardWebhook } from '../helpers/webhooks.js';

const SECRET = 'whsec_cGxhbnQtb3BzLXRlc3Qtc2VjcmV0LWJ5dGVz';
const MIN = 60_000;
const T0 = Date.parse('2026-11-30T06:00:00Z');
const GOOD = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93];
const STUCK = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 0.0, 23.7, 47.93];

const tmp = tempDir();
afterAll(() => tmp.remove());
let receiver: Awaited<ReturnType<typeof startReceiver>>;
let server: RunningServer;

function config(db: string, url: string) {
  return configSchema.parse({
    port: 0,
    models_dir: join(DEMO_DIR, 'models'),
    db,
    logger: { level: 'silent' },
    reports: { schedule: 'off' },
    alerts: {
      rules: [{ name: 'cell3-out-of-domain', model: '*', signal: 'out_of_domain_rate', window: '10m', above: 0.05, min_requests: 40, sustain: '2m', notify: ['plant-ops'] }],
      webhooks: { 'plant-ops': { url, secret_env: 'PLANT_OPS_SECRET', timeout_s: 2 } },
      delivery: { retry_base: '1s', retry_cap: '10s', give_up_after: '1h' },
    },
  });
}

async function start(db: string): Promise<RunningServer> {
  return startServer(config(db, receiver.url), { env: { PLANT_OPS_SECRET: SECRET }, timers: false });
}

/** Scores `n` vectors stamped evenly over [from, to), as the plant-floor app would send them. */
async function traffic(s: RunningServer, vector: number[], n: number, from: number, to: number): Promise<void> {
  await Promise.all(
    Array.from({ length: n }, (_, i) =>
      s.app.scoring.scoreOne('moulding-quality', { features: vector }, { requestId: uuidv7(), receivedAt: Math.round(from + ((to - from) * i) / n), elapsedMs: () => 0 }),
    ),
  );
}

const events = () => receiver.received.map((r) => ({ ...r, event: JSON.parse(r.body) as { id: string; type: string; specversion: string; source: string; subject: string; time: string; datacontenttype: string; data: Record<string, unknown> } }));
const tick = (s: RunningServer, at: number) => s.app.alerting.tick(at);

beforeEach(async () => {
  receiver = await startReceiver();
});
afterEach(async () => {
  await server?.close();
  await receiver.close();
});

describe('alerts on out-of-domain traffic', () => {
  it('raise after the condition holds for sustain, deliver a signed CloudEvent, and clear only after a whole window of recovery', async () => {
    server = await start(tmp.file('a.db'));
    await traffic(server, GOOD, 200, T0, T0 + 10 * MIN);
    await tick(server, T0 + 10 * MIN);
    expect(server.app.alerting.evaluator.states()).toEqual([expect.objectContaining({ phase: 'quiet', requests: 200 })]);

    // the cushion transducer sticks at 0 mm for five minutes
    await traffic(server, STUCK, 100, T0 + 10 * MIN, T0 + 15 * MIN);
    await tick(server, T0 + 15 * MIN);
    expect(server.app.alerting.evaluator.states()[0]!.phase).toBe('holding');
    expect(receiver.received).toHaveLength(0);
    await traffic(server, STUCK, 60, T0 + 15 * MIN, T0 + 18 * MIN);
    await tick(server, T0 + 18 * MIN);
    expect(server.app.alerting.evaluator.states()[0]!.phase).toBe('raised');

    const [raised] = events();
    expect(raised!.headers['content-type']).toBe('application/cloudevents+json; charset=utf-8');
    expect(raised!.event).toMatchObject({ specversion: '1.0', type: 'plumbline.alert.raised', subject: 'cell3-out-of-domain/moulding-quality', datacontenttype: 'application/json' });
    expect(raised!.event.data).toMatchObject({ rule: 'cell3-out-of-domain', model: 'moulding-quality', signal: 'out_of_domain_rate', direction: 'above', threshold: 0.05, window: '10m', cleared_at: null });
    expect(raised!.headers['webhook-id']).toBe(raised!.event.id);
    expect(verifyStandardWebhook(raised!.headers as Record<string, string>, raised!.body, SECRET, Math.floor(Date.now() / 1000))).toBe(true);

    // recovery: normal shots again; the condition is false from 29 min, cleared a window later
    await traffic(server, GOOD, 600, T0 + 18 * MIN, T0 + 45 * MIN);
    await tick(server, T0 + 25 * MIN);
    expect(server.app.alerting.evaluator.states()[0]!.phase).toBe('raised');
    await tick(server, T0 + 29 * MIN);
    await tick(server, T0 + 35 * MIN);
    expect(server.app.alerting.evaluator.states()[0]!.phase).toBe('raised');
    await tick(server, T0 + 39 * MIN);
    expect(server.app.alerting.evaluator.states()[0]!.phase).toBe('quiet');
    const [, cleared] = events();
    expect(cleared!.event.type).toBe('plumbline.alert.cleared');
    expect(cleared!.event.data.alert_id).toBe(raised!.event.data.alert_id);
    expect(verifyStandardWebhook(cleared!.headers as Record<string, string>, cleared!.body, SECRET, Math.floor(Date.now() / 1000))).toBe(true);

    const alerts = (await server.app.inject('/v1/alerts')).json();
    expect(alerts.items).toEqual([
      expect.objectContaining({ state: 'cleared', rule: 'cell3-out-of-domain', model: 'moulding-quality', raised_at: new Date(T0 + 18 * MIN).toISOString(), cleared_at: new Date(T0 + 39 * MIN).toISOString() }),
    ]);
    expect((await server.app.inject('/v1/alerts?state=raised')).json().items).toEqual([]);
  });

  it('deliver everything, in order and with the same webhook-id on every attempt, to a receiver that was down', async () => {
    server = await start(tmp.file('b.db'));
    receiver.down = true;
    await traffic(server, STUCK, 60, T0, T0 + 5 * MIN);
    await tick(server, T0 + 5 * MIN);
    await tick(server, T0 + 8 * MIN); // raised
    await traffic(server, GOOD, 2000, T0 + 8 * MIN, T0 + 30 * MIN);
    await tick(server, T0 + 16 * MIN);
    await tick(server, T0 + 27 * MIN); // cleared
    for (let s = 1; s <= 5; s++) await server.app.alerting.deliverer.tick(T0 + 30 * MIN + s * 1000);
    expect(receiver.received).toHaveLength(0);
    // the raised event has been tried and tried again; the cleared one waits behind it, in order
    const [first, second] = (await server.runtime.store.alerts.deliveries());
    expect(first!.attempts).toBeGreaterThanOrEqual(3);
    expect(first!.last_error).toBe('answered 503');
    expect(second!.attempts).toBe(0);

    receiver.down = false;
    await server.app.alerting.deliverer.tick(T0 + 2 * 60 * MIN);
    await server.app.alerting.deliverer.tick(T0 + 2 * 60 * MIN);
    expect(events().map((e) => e.event.type)).toEqual(['plumbline.alert.raised', 'plumbline.alert.cleared']);
    const outbox = (await server.runtime.store.alerts.deliveries());
    expect(outbox.map((d) => d.status)).toEqual(['delivered', 'delivered']);
    expect(events().map((e) => e.headers['webhook-id'])).toEqual(outbox.map((d) => d.event_id));
  });

  it('lose no delivery across a restart', async () => {
    const db = tmp.file('c.db');
    server = await start(db);
    receiver.down = true;
    await traffic(server, STUCK, 60, T0, T0 + 5 * MIN);
    await tick(server, T0 + 5 * MIN);
    await tick(server, T0 + 8 * MIN);
    expect((await server.runtime.store.alerts.deliveries()).map((d) => d.status)).toEqual(['pending']);
    await server.close();

    receiver.down = false;
    server = await start(db);
    // the raised alert is still raised after the restart, and is not raised twice
    expect(server.app.alerting.evaluator.states()).toEqual([expect.objectContaining({ phase: 'raised' })]);
    await tick(server, T0 + 9 * MIN);
    await server.app.alerting.deliverer.tick(T0 + 60 * MIN);
    expect(events().map((e) => e.event.type)).toEqual(['plumbline.alert.raised']);
    expect((await server.runtime.store.alerts.deliveries()).map((d) => d.status)).toEqual(['delivered']);
  });

  it('give up after give_up_after, mark the delivery failed, and keep going', async () => {
    server = await start(tmp.file('d.db'));
    receiver.down = true;
    await traffic(server, STUCK, 60, T0, T0 + 5 * MIN);
    await tick(server, T0 + 5 * MIN);
    await tick(server, T0 + 8 * MIN);
    await server.app.alerting.deliverer.tick(T0 + 8 * MIN);
    await server.app.alerting.deliverer.tick(T0 + 8 * MIN + 2 * 60 * MIN); // past the hour
    const [d] = (await server.runtime.store.alerts.deliveries());
    expect(d).toMatchObject({ status: 'failed', last_error: 'answered 503' });
  });
});

describe('GET /metrics', () => {
  it('exposes the scoring counters, the latency histogram, alert gauges and outbox depth in valid Prometheus text format', async () => {
    server = await start(tmp.file('m.db'));
    await traffic(server, STUCK, 60, T0, T0 + 5 * MIN);
    await server.app.inject({ method: 'POST', url: '/v1/models/moulding-quality/score', payload: { features: [1] } });
    await tick(server, T0 + 5 * MIN);
    const res = await server.app.inject('/metrics');
    expect(res.statusCode).toBe(200);
    expect(res.headers['content-type']).toMatch(/^text\/plain; version=0\.0\.4/);
    const text = res.body;
    // Strict check of the text exposition format (Prometheus documentation, "Exposition formats").
    const name = '[a-zA-Z_:][a-zA-Z0-9_:]*';
    const labels = `\\{(${name}="(\\\\.|[^"\\\\])*"(,${name}="(\\\\.|[^"\\\\])*")*)?\\}`;
    // Values are Go ParseFloat numbers; NaN and Inf are accepted in any case.
    const sample = new RegExp(`^${name}(${labels})? (-?\\d+(\\.\\d+)?(e[+-]?\\d+)?|[Nn][Aa][Nn]|[+-][Ii]nf)( \\d+)?$`);
    for (const line of text.trim().split('\n')) {
      if (line === '' || line.startsWith('# HELP ') || line.startsWith('# TYPE ')) continue;
      expect(line, line).toMatch(sample);
    }
    expect(text).toMatch(/^plumbline_scored_total\{model="moulding-quality",label="sink_marks",in_domain="false"\} 60$/m);
    expect(text).toMatch(/^plumbline_rejected_total\{model="moulding-quality",problem="invalid-request"\} 1$/m);
    expect(text).toMatch(/^plumbline_score_latency_seconds_count\{model="moulding-quality"\} 60$/m);
    expect(text).toMatch(/^plumbline_alert_state\{rule="cell3-out-of-domain",model="moulding-quality"\} 1$/m);
    expect(text).toMatch(/^plumbline_alert_signal\{rule="cell3-out-of-domain",model="moulding-quality"\} 1$/m);
    expect(text).toMatch(/^plumbline_outbox_depth 0$/m);
    expect(text).toMatch(/^# HELP plumbline_scored_total /m);
  });
});
