// The one place that reads the process environment; everything else takes values as arguments.
import { readFileSync } from 'node:fs';
import { Cron } from 'croner';
import { z } from 'zod';
import { alertsSchema } from './alert-rules.js';

/**
 * The build time for reproducible artefacts: SOURCE_DATE_EPOCH (seconds since the epoch, see
 * reproducible-builds.org/specs/source-date-epoch) when set, else now.
 */
export function buildTime(env: NodeJS.ProcessEnv = process.env, now: () => Date = () => new Date()): Date {
  const raw = env.SOURCE_DATE_EPOCH;
  if (raw === undefined || raw === '') return now();
  // 253402300799 is 9999-12-31T23:59:59Z, the last second an ISO 8601 four-digit year can write.
  if (!/^\d{1,12}$/.test(raw) || Number(raw) > 253402300799) {
    throw new ConfigError([`SOURCE_DATE_EPOCH = ${JSON.stringify(raw)} (environment): must be whole seconds since 1970, at most 253402300799`]);
  }
  return new Date(Number(raw) * 1000);
}

const int = (min: number, max: number) => z.number().int().min(min).max(max);

function isCronPattern(s: string): boolean {
  try {
    new Cron(s, { paused: true });
    return true;
  } catch {
    return false;
  }
}

function isTimeZone(s: string): boolean {
  try {
    new Intl.DateTimeFormat('en-US', { timeZone: s });
    return true;
  } catch {
    return false;
  }
}

/** The service configuration. Every key has a default, so an empty file is a valid one. */
export const configSchema = z
  .strictObject({
  host: z.string().min(1).default('127.0.0.1'),
  port: int(0, 65535).default(8080),
  /** Directory whose *.bundle.json files are served. */
  models_dir: z.string().min(1).default('models'),
  /**
   * The audit log: a SQLite file (created with its directory when missing), or a postgres:// or
   * postgresql:// URL (libpq's URI syntax) for several replicas on one PostgreSQL server.
   */
  db: z.string().min(1).default('var/plumbline.db'),
  /** Only when `db` is a PostgreSQL URL (src/store/postgres/). */
  postgres: z
    .strictObject({
      /** Connections each replica opens at most (the group-commit writer takes one per batch). */
      pool_size: int(2, 1000).default(10),
      /** A statement running longer is cancelled by the server (statement_timeout), in ms. */
      statement_timeout_ms: int(100, 3_600_000).default(30_000),
      /** Waiting longer for a connection to the server fails the operation, in ms. */
      connect_timeout_ms: int(100, 600_000).default(5_000),
    })
    .prefault({}),
  /**
   * "keys": once one API key exists in the database, every /v1 route needs one (and with none
   * the server listens on loopback only). "off": no key is asked for, on any address.
   */
  auth: z.enum(['keys', 'off']).default('keys'),
  /** Serve HTTPS with this PEM certificate chain and private key (both or neither). */
  tls: z
    .strictObject({
      cert: z.string().min(1).optional(),
      key: z.string().min(1).optional(),
    })
    .prefault({})
    .refine((t) => (t.cert === undefined) === (t.key === undefined), { message: 'give both tls.cert and tls.key, or neither' }),
  /** Scored rows older than this many days are pruned nightly; 0 keeps them for ever. */
  retention_days: int(0, 36_500).default(90),
  logger: z
    .strictObject({
      level: z.enum(['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent']).default('info'),
    })
    .prefault({}),
  /** The audit log's write path (group commit). */
  log: z
    .strictObject({
      /** "normal": durable across a process crash (WAL); "full": also across power loss. */
      sync: z.enum(['normal', 'full']).default('normal'),
      /** Wait this long for more rows before committing; 0 commits on the next turn of the event loop. */
      flush_ms: int(0, 1000).default(0),
      /** Commit at once when this many rows wait. */
      flush_rows: int(1, 100_000).default(512),
      /** Rows waiting beyond this are refused with 503 rather than held in memory. */
      queue_rows: int(1, 10_000_000).default(50_000),
      /** Newest rejected requests kept for inspection; older ones are pruned. */
      rejected_rows: int(0, 10_000_000).default(100_000),
      /** When a commit fails: "fail" answers 503 (no unaudited answer); "serve" answers and counts what was not logged. */
      on_error: z.enum(['fail', 'serve']).default('fail'),
      /** Where commits run: on the event loop, or on a thread of their own (pays where a core is free). */
      writer: z.enum(['event-loop', 'thread']).default('event-loop'),
      /** The write-ahead log file is kept under this many bytes under load (src/store/wal-bound.ts). */
      wal_max_bytes: int(2 ** 20, 2 ** 40).default(64 * 2 ** 20),
    })
    .prefault({}),
  /** The nightly drift report. */
  reports: z
    .strictObject({
      /** Run one report per loaded model for the previous day on this cron schedule; "off" to disable. */
      schedule: z
        .string()
        .default('0 2 * * *')
        .refine((s) => s === 'off' || isCronPattern(s), 'must be a cron pattern such as "0 2 * * *" (minute hour day month weekday), or "off"'),
      /** IANA time zone of the schedule and of the day boundaries, e.g. "Europe/Berlin". */
      timezone: z.string().default('UTC').refine(isTimeZone, 'must be an IANA time zone such as "UTC" or "Europe/Berlin"'),
      /** Windows with fewer scored rows give counts instead of p-values. */
      min_rows: int(1, 1_000_000).default(30),
      /** Rows kept for KS and Wasserstein; above it a seeded uniform reservoir. */
      sample_cap: int(100, 1_000_000).default(10_000),
    })
    .prefault({}),
  /** Rules that raise alerts from the audit log, and the webhooks that hear of them (rules and webhooks from the config file only). */
  alerts: alertsSchema.prefault({}),
  metrics: z
    .strictObject({
      /** Serve GET /metrics in the Prometheus text format. */
      enabled: z.boolean().default(true),
      /** Serve it without an API key (to a scraper that cannot send one); otherwise it needs a reader key. */
      public: z.boolean().default(false),
    })
    .prefault({}),
  limits: z
    .strictObject({
      body_bytes: int(1024, 1 << 30).default(1 << 20),
      batch_items: int(1, 100_000).default(1000),
      tags: int(0, 256).default(16),
      tag_key_chars: int(1, 1024).default(64),
      tag_value_chars: int(1, 4096).default(256),
      /** Requests per minute per API key (per client address without keys); 0 for no limit. */
      requests_per_minute: int(0, 10_000_000).default(60_000),
      /** Answer 503 overloaded while the event loop lags more than this; 0 to never. */
      event_loop_delay_ms: int(0, 60_000).default(1000),
      /** The largest bundle file read from the models directory (src/bundle/directory-file.ts). */
      bundle_bytes: int(1024, 512 * 2 ** 20).default(64 * 2 ** 20),
    })
    .prefault({}),
  })
  // A batch larger than the queue could never be logged, and would be refused forever.
  .refine((c) => c.log.queue_rows >= c.limits.batch_items, { path: ['log', 'queue_rows'], message: 'must be at least limits.batch_items, or a full batch could never be logged' });

export type Config = z.infer<typeof configSchema>;

/** Where a configuration value came from, for error messages. */
type Origin = string;

interface Leaf {
  path: string[];
  kind: 'number' | 'string' | 'boolean';
  env: string;
}

function unwrap(schema: z.ZodType): z.ZodType {
  let s = schema;
  for (;;) {
    const def = s.def as { type: string; innerType?: z.ZodType };
    if ((def.type === 'default' || def.type === 'prefault' || def.type === 'optional') && def.innerType) s = def.innerType;
    else return s;
  }
}

function leavesOf(schema: z.ZodType, path: string[] = []): Leaf[] {
  const s = unwrap(schema);
  if (s.def.type === 'object') {
    return Object.entries((s as z.ZodObject).shape).flatMap(([k, v]) => leavesOf(v as z.ZodType, [...path, k]));
  }
  // Lists and maps (alert rules, webhooks) come from the file only.
  if (s.def.type === 'array' || s.def.type === 'record') return [];
  const kind = s.def.type === 'number' ? 'number' : s.def.type === 'boolean' ? 'boolean' : 'string';
  return [{ path, kind, env: `PLUMBLINE_${path.join('_').toUpperCase()}` }];
}

/** Every configuration key with the environment variable that sets it (PLUMBLINE_ + path in upper snake case). */
export const CONFIG_KEYS: readonly Leaf[] = leavesOf(configSchema);

export class ConfigError extends Error {
  constructor(readonly problems: string[]) {
    super(`configuration refused:\n${problems.map((p) => `  ${p}`).join('\n')}`);
    this.name = 'ConfigError';
  }
}

function setPath(target: Record<string, unknown>, path: string[], value: unknown): void {
  let node = target;
  path.slice(0, -1).forEach((k) => {
    if (typeof node[k] !== 'object' || node[k] === null || Array.isArray(node[k])) node[k] = {};
    node = node[k] as Record<string, unknown>;
  });
  node[path[path.length - 1] as string] = value;
}

function getPath(source: unknown, path: readonly PropertyKey[]): unknown {
  return path.reduce<unknown>((node, k) => (node !== null && typeof node === 'object' ? (node as Record<PropertyKey, unknown>)[k] : undefined), source);
}

function coerce(raw: string, kind: Leaf['kind']): unknown {
  // Plain decimals only: Number() would also take "0x10", " 8 " and "1e3" for a port.
  if (kind === 'number') return /^-?\d+(\.\d+)?$/.test(raw) ? Number(raw) : raw;
  if (kind === 'boolean') return raw === 'true' ? true : raw === 'false' ? false : raw;
  return raw;
}

export interface ConfigSources {
  /** Path of a JSON configuration file, if any. */
  file?: string;
  env?: NodeJS.ProcessEnv;
  /** Values from command-line flags, as dotted keys (e.g. {"models_dir": "demo-data/models"}). */
  flags?: Record<string, unknown>;
}

/**
 * Loads the configuration in labelled stages: the file, then PLUMBLINE_* environment variables,
 * then flags (each overriding the one before), then defaults, then validation. Errors name the
 * key, the value and where it came from.
 */
export function loadConfig(sources: ConfigSources): { config: Config; warnings: string[] } {
  const merged: Record<string, unknown> = {};
  const origin = new Map<string, Origin>();
  const problems: string[] = [];
  const warnings: string[] = [];

  if (sources.file !== undefined) {
    let text: string;
    try {
      text = readFileSync(sources.file, 'utf8');
    } catch (err) {
      throw new ConfigError([`config file ${sources.file} cannot be read (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`]);
    }
    let json: unknown;
    try {
      json = JSON.parse(text);
    } catch (err) {
      throw new ConfigError([`config file ${sources.file} is not JSON (${(err as Error).message})`]);
    }
    if (typeof json !== 'object' || json === null || Array.isArray(json)) throw new ConfigError([`config file ${sources.file} must hold a JSON object`]);
    Object.assign(merged, structuredClone(json));
    const mark = (node: unknown, path: string[]): void => {
      if (node !== null && typeof node === 'object' && !Array.isArray(node)) {
        for (const [k, v] of Object.entries(node)) mark(v, [...path, k]);
      } else origin.set(path.join('.'), `config file ${sources.file}`);
    };
    mark(json, []);
  }

  const env = sources.env ?? {};
  for (const leaf of CONFIG_KEYS) {
    const raw = env[leaf.env];
    if (raw === undefined) continue;
    setPath(merged, leaf.path, coerce(raw, leaf.kind));
    origin.set(leaf.path.join('.'), `environment ${leaf.env}`);
  }
  const known = new Set(CONFIG_KEYS.map((l) => l.env));
  // Webhook secrets may be kept in variables of any name, ours included.
  const fileWebhooks = (merged as { alerts?: { webhooks?: Record<string, { secret_env?: unknown }> } } | undefined)?.alerts?.webhooks ?? {};
  for (const w of Object.values(fileWebhooks)) if (typeof w?.secret_env === 'string') known.add(w.secret_env);
  for (const name of Object.keys(env)) {
    // A warning, not an error: other tools, and secrets kept in the environment, may share the prefix.
    if (name.startsWith('PLUMBLINE_') && !known.has(name)) warnings.push(`environment ${name} is not a configuration key; ignored`);
  }

  for (const [key, value] of Object.entries(sources.flags ?? {})) {
    if (value === undefined) continue;
    setPath(merged, key.split('.'), value);
    origin.set(key, `flag ${FLAG_NAMES[key] ?? `--${key}`}`);
  }

  const parsed = configSchema.safeParse(merged);
  if (!parsed.success) {
    for (const issue of parsed.error.issues) {
      const key = issue.path.join('.');
      if (issue.code === 'unrecognized_keys') {
        for (const k of issue.keys) problems.push(`${[describeKey(issue.path, merged), k].filter(Boolean).join('.')} is not a configuration key (${origin.get([key, k].filter(Boolean).join('.')) ?? 'config file'})`);
        continue;
      }
      const value = getPath(merged, issue.path);
      // A value inside a list (an alert rule's key) has the origin of the list.
      let from: string | undefined;
      for (let n = issue.path.length; n > 0 && from === undefined; n--) from = origin.get(issue.path.slice(0, n).join('.'));
      // A check over a whole object (tls: both or neither) has the origins of the keys set in it.
      if (from === undefined && key !== '') from = [...new Set([...origin].filter(([k]) => k.startsWith(`${key}.`)).map(([, o]) => o))].join(', ') || undefined;
      problems.push(`${describeKey(issue.path, merged)} = ${JSON.stringify(value)} (${from ?? 'default'}): ${issue.message}`);
    }
  }
  if (problems.length > 0) throw new ConfigError(problems);
  return { config: parsed.data as Config, warnings };
}

/** A key for an error message; an alert rule is named by its name as well as its index. */
function describeKey(path: readonly PropertyKey[], merged: unknown): string {
  const key = path.join('.');
  if (path[0] === 'alerts' && path[1] === 'rules' && typeof path[2] === 'number') {
    const name = getPath(merged, ['alerts', 'rules', path[2], 'name']);
    if (typeof name === 'string') return `alerts.rules[${path[2]}] (${name}).${path.slice(3).join('.')}`;
  }
  return key;
}

/** Flags of `plumbline serve` whose name differs from their key. */
const FLAG_NAMES: Record<string, string> = { models_dir: '--models' };

/** The process environment, for the CLI entry points (the only reader of process.env). */
export function processEnv(): NodeJS.ProcessEnv {
  return process.env;
}
