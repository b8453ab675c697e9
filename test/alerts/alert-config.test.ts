import { describe, expect, it } from 'vitest';
import { parseDuration } from '../../src/config/durations.js';
import { ConfigError, configSchema, loadConfig } from '../../src/config/config.js';
import { startServer } from '../../src/http/server.js';
import { DEMO_DIR } from '../helpers/demo.js';
import { tempDir } from '../helpers/datasets.js';
import { join } from 'node:path';
import { startTestService } from '../helpers/service.js';

describe('alert configuration', () => {
  it('reads durations as whole milliseconds, 0 included', () => {
    expect(parseDuration('0s')).toBe(0);
    expect(parseDuration('1.5s')).toBe(1500);
    expect(parseDuration('15m')).toBe(900_000);
    expect(parseDuration('0.1ms')).toBeNull();
    expect(parseDuration('10')).toBeNull();
    expect(parseDuration('-5s')).toBeNull();
  });

  it('takes sustain 0s, and refuses a check_every no timer can wait for, and the old key evaluate_every', () => {
    const rule = { name: 'r', model: '*', signal: 'out_of_domain_rate', above: 0.05, sustain: '0s' };
    expect(configSchema.parse({ alerts: { rules: [rule] } }).alerts.rules[0]?.sustain).toBe(0);
    // Node runs a timer of more than 2^31-1 ms (about 24.8 days) after 1 ms instead
    expect(() => configSchema.parse({ alerts: { check_every: '30d' } })).toThrow(/check_every must be from 1s to 1d/);
    expect(() => configSchema.parse({ alerts: { check_every: '0s' } })).toThrow(/check_every must be from 1s to 1d/);
    // renamed, not aliased: a configuration that still says evaluate_every is refused
    expect(() => configSchema.parse({ alerts: { evaluate_every: '30s' } })).toThrow(/evaluate_every/);
  });

  it('does not warn about a PLUMBLINE_ variable that holds a webhook secret', () => {
    const tmp = tempDir();
    try {
      const file = tmp.file('c.json', JSON.stringify({ alerts: { webhooks: { ops: { url: 'http://127.0.0.1:9/x', secret_env: 'PLUMBLINE_OPS_SECRET' } } } }));
      expect(loadConfig({ file, env: { PLUMBLINE_OPS_SECRET: 'whsec_AAAA', PLUMBLINE_OTHER: 'x' } }).warnings).toEqual(['environment PLUMBLINE_OTHER is not a configuration key; ignored']);
    } finally {
      tmp.remove();
    }
  });

  it('refuses to start, as a configuration error, when a secret_env variable is unset', async () => {
    const tmp = tempDir();
    try {
      const config = configSchema.parse({
        port: 0,
        models_dir: join(DEMO_DIR, 'models'),
        db: tmp.file('a.db'),
        logger: { level: 'silent' },
        reports: { schedule: 'off' },
        alerts: { webhooks: { ops: { url: 'http://127.0.0.1:9/x', secret_env: 'OPS_SECRET' } } },
      });
      const err = await startServer(config, { env: {} }).catch((e: unknown) => e);
      expect(err).toBeInstanceOf(ConfigError);
      expect((err as Error).message).toContain('alerts.webhooks.ops.secret_env = "OPS_SECRET": that environment variable holds no secret');
    } finally {
      tmp.remove();
    }
  });

  it('GET /v1/alerts refuses a to that is not later than from', async () => {
    const svc = await startTestService();
    try {
      const res = await svc.app.inject('/v1/alerts?from=2026-12-01T00:00:00Z&to=2026-12-01T00:00:00Z');
      expect(res.statusCode).toBe(400);
      expect(res.json().errors).toEqual([{ parameter: 'to', detail: 'must be later than from' }]);
    } finally {
      await svc.close();
    }
  });
});
