import { describe, expect, it } from 'vitest';
import { CONFIG_KEYS, ConfigError, buildTime, loadConfig } from '../src/config/config.js';
import { tempDir } from './helpers/datasets.js';

const tmp = tempDir();

function problems(fn: () => unknown): string[] {
  try {
    fn();
  } catch (err) {
    if (err instanceof ConfigError) return err.problems;
    throw err;
  }
  throw new Error('expected a ConfigError');
}

describe('configuration', () => {
  it('has a default for every key', () => {
    const { config } = loadConfig({});
    expect(config).toMatchObject({ host: '127.0.0.1', port: 8080, db: 'var/plumbline.db', log: { sync: 'normal' }, limits: { batch_items: 1000, body_bytes: 1048576 } });
  });

  it('takes the file, then PLUMBLINE_* variables, then flags, each overriding the one before', () => {
    const file = tmp.file('c.json', JSON.stringify({ port: 9000, host: '0.0.0.0', limits: { batch_items: 50, tags: 4 }, log: { sync: 'full' } }));
    const { config } = loadConfig({
      file,
      env: { PLUMBLINE_PORT: '9100', PLUMBLINE_LIMITS_BATCH_ITEMS: '60', PLUMBLINE_DB: '/data/a.db' },
      flags: { port: 9200, models_dir: '/models' },
    });
    expect(config.port).toBe(9200); // flag over env over file
    expect(config.limits.batch_items).toBe(60); // env over file
    expect(config.limits.tags).toBe(4); // file
    expect(config.log.sync).toBe('full'); // file
    expect(config.host).toBe('0.0.0.0');
    expect(config.db).toBe('/data/a.db');
    expect(config.models_dir).toBe('/models');
    expect(config.limits.body_bytes).toBe(1048576); // default
  });

  it('names the key, the value and where it came from in every error', () => {
    const file = tmp.file('bad.json', JSON.stringify({ port: 'eighty', limits: { batch_itmes: 5 }, log: { sync: 'fast' } }));
    const found = problems(() => loadConfig({ file, env: { PLUMBLINE_LIMITS_TAGS: 'many' }, flags: { host: '' } }));
    expect(found).toEqual(
      expect.arrayContaining([
        `port = "eighty" (config file ${file}): Invalid input: expected number, received string`,
        `limits.batch_itmes is not a configuration key (config file ${file})`,
        `log.sync = "fast" (config file ${file}): Invalid option: expected one of "normal"|"full"`,
        'limits.tags = "many" (environment PLUMBLINE_LIMITS_TAGS): Invalid input: expected number, received string',
        'host = "" (flag --host): Too small: expected string to have >=1 characters',
      ]),
    );
  });

  it('refuses a queue smaller than the largest batch, which could never be logged', () => {
    expect(problems(() => loadConfig({ env: { PLUMBLINE_LOG_QUEUE_ROWS: '500' } }))).toEqual([
      'log.queue_rows = 500 (environment PLUMBLINE_LOG_QUEUE_ROWS): must be at least limits.batch_items, or a full batch could never be logged',
    ]);
  });

  it('reads numbers from the environment as plain decimals only', () => {
    for (const raw of ['0x1F90', ' 8080', '8e3', '']) expect(problems(() => loadConfig({ env: { PLUMBLINE_PORT: raw } }))[0]).toMatch(/^port = /);
  });

  it('refuses a file that cannot be read or is not a JSON object', () => {
    expect(problems(() => loadConfig({ file: tmp.file('none.json') }))[0]).toMatch(/cannot be read \(ENOENT\)/);
    expect(problems(() => loadConfig({ file: tmp.file('list.json', '[1]') }))[0]).toMatch(/must hold a JSON object/);
    expect(problems(() => loadConfig({ file: tmp.file('broken.json', '{"port": ') }))[0]).toMatch(/is not JSON/);
  });

  it('warns about, but does not refuse, an unknown PLUMBLINE_ variable', () => {
    expect(loadConfig({ env: { PLUMBLINE_WEBHOOK_SECRET: 'x' } }).warnings).toEqual(['environment PLUMBLINE_WEBHOOK_SECRET is not a configuration key; ignored']);
  });

  it('names where a value came from when a check spans an object', () => {
    expect(problems(() => loadConfig({ env: { PLUMBLINE_TLS_CERT: '/etc/plumbline/cert.pem' } }))).toEqual(['tls = {"cert":"/etc/plumbline/cert.pem"} (environment PLUMBLINE_TLS_CERT): give both tls.cert and tls.key, or neither']);
  });

  it('gives every key its own environment variable', () => {
    const names = CONFIG_KEYS.map((k) => k.env);
    expect(new Set(names).size).toBe(names.length);
    expect(names).toContain('PLUMBLINE_LOG_SYNC');
  });
});

describe('SOURCE_DATE_EPOCH', () => {
  it('sets the build time when given, in whole seconds', () => {
    expect(buildTime({ SOURCE_DATE_EPOCH: '1793599200' }).toISOString()).toBe('2026-11-02T06:00:00.000Z');
    const now = new Date('2030-01-01T00:00:00Z');
    expect(buildTime({}, () => now)).toBe(now);
  });

  it('refuses a value that is not whole seconds or lies past the year 9999', () => {
    expect(() => buildTime({ SOURCE_DATE_EPOCH: 'yesterday' })).toThrow(ConfigError);
    expect(() => buildTime({ SOURCE_DATE_EPOCH: '999999999999' })).toThrow(/at most 253402300799/);
  });
});
