import { readFileSync, writeFileSync } from 'node:fs';
import BetterSqlite3 from 'better-sqlite3';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { driftAction } from '../../src/cli/actions/drift.js';
import { recordDemoOutcomes } from '../../src/demo/outcomes.js';
import { replayDemoDay } from '../../src/demo/replay.js';
import { DEFAULT_VARYING, type Example, carry, dumpOutput, examplesOf, fencedBlocks, quoteProblems, readDoc, runCommand } from '../helpers/doc-examples.js';
import { type DocServer, startDocServer } from '../helpers/doc-servers.js';
import { DAY_START, DEMO_DIR } from '../helpers/demo.js';
import { sink } from '../helpers/sink.js';
import { configSchema } from '../../src/config/config.js';

// Every curl example of docs/api.md, run as written with real curl against real servers on the
// committed demo bundle, in the order the doc gives them, and held to the output the doc quotes.
// Each example runs against the server its text says it was run against.

const DOC = readDoc('docs/api.md');
const examples = examplesOf(DOC);
const BUNDLE_TEXT = readFileSync(join(DEMO_DIR, 'models/moulding-quality.bundle.json'), 'utf8');
const DAY = 86_400_000;
const HOUR = 3_600_000;

type ServerName = 'open' | 'keyed' | 'limited' | 'unlogged' | 'empty' | 'drift' | 'noMetrics' | 'backpressure' | 'metrics';
const servers = {} as Record<ServerName, DocServer>;
const seen = new Map<string, string>();
let keyedModels = '';

/** Where each example was run, as the doc says; null when the doc says its values vary (kept by a test of its own below). */
function serverFor(e: Example): ServerName | null {
  if (e.section === 'GET /v1/alerts' && !e.command.includes('state=open')) return null; // timing of a live run: see the last tests
  if (e.section === 'GET /metrics') return e.line > DOC.split('\n').findIndex((l) => l.startsWith('With `PLUMBLINE_METRICS_ENABLED=false`')) ? 'noMetrics' : null;
  if (e.output.includes('plumbline-audit: not-logged')) return 'unlogged';
  if (e.output.includes('429 Too Many Requests')) return 'limited';
  if (e.output.includes('"status":"not ready"')) return 'empty';
  if (e.output.includes('log-backpressure')) return 'backpressure';
  if (e.section.includes('drift-reports') || e.section.includes('outcomes') || e.section.includes('compare')) return 'drift';
  if (e.section === 'Authentication' || e.command.includes('_KEY')) return 'keyed';
  return 'open';
}

async function before(e: Example, name: ServerName): Promise<(() => Promise<void>) | void> {
  const s = servers[name];
  if (name === 'limited') {
    // "the fourth request within the minute"
    for (let i = 0; i < 3; i++) await fetch(`${s.server.url}/v1/models`, { headers: { authorization: `Bearer ${s.env.ADMIN_KEY}` } });
  }
  if (name === 'keyed' && e.output.includes('reload-refused')) {
    // "a copy of the demo bundle edited by hand (name and version changed, sha256 left as it was)"
    writeFileSync(join(keyedModels, 'press-7.bundle.json'), JSON.stringify({ ...JSON.parse(BUNDLE_TEXT), name: 'press-7', version: '7' }));
  }
  if (name === 'backpressure') {
    // "while a first request was still waiting for its commit" (log.flush_ms 1000)
    const first = fetch(`${s.server.url}/v1/models/moulding-quality/score`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ features: [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93] }) });
    await new Promise((r) => setTimeout(r, 100));
    return async () => void (await first);
  }
}

beforeAll(async () => {
  servers.open = await startDocServer();
  servers.keyed = await startDocServer({ keys: true, models: 'copy' });
  keyedModels = join(servers.keyed.dir, 'models');
  servers.limited = await startDocServer({ keys: true, config: { limits: { requests_per_minute: 3 } } });
  servers.unlogged = await startDocServer({ keys: true, config: { log: { on_error: 'serve' } } });
  // "whose database refused every insert into scored_requests (a trigger made it fail with "disk full")"
  const raw = new BetterSqlite3(servers.unlogged.server.app.config.db);
  raw.exec("CREATE TRIGGER disk_full BEFORE INSERT ON scored_requests BEGIN SELECT RAISE(ABORT, 'disk full'); END");
  raw.close();
  servers.empty = await startDocServer({ models: 'empty' });
  servers.noMetrics = await startDocServer({ config: { metrics: { enabled: false } } });
  servers.backpressure = await startDocServer({ config: { log: { queue_rows: 1, flush_ms: 1000 }, limits: { batch_items: 1 } } });
  // The drift examples: the invented demo day, then the reports the doc says were made from the
  // command line (the day, the day again with --min-rows 5000, and 05:00 to 07:00).
  servers.drift = await startDocServer();
  const app = servers.drift.server.app;
  const replayed = await replayDemoDay(app.scoring, 'moulding-quality', DEMO_DIR, DAY_START);
  const db = app.config.db;
  const io = { stdout: sink(), stderr: sink(), interactive: false };
  const day = await driftAction({ db, model: 'moulding-quality', from: new Date(DAY_START), to: new Date(DAY_START + DAY), minRows: 30, sampleCap: 10_000 }, io);
  await driftAction({ db, model: 'moulding-quality', from: new Date(DAY_START), to: new Date(DAY_START + DAY), minRows: 5000, sampleCap: 10_000 }, io);
  await driftAction({ db, model: 'moulding-quality', from: new Date(DAY_START + 5 * HOUR), to: new Date(DAY_START + 7 * HOUR), minRows: 30, sampleCap: 10_000 }, io);
  seen.set('01a233ef-b780-7000-87a7-cc7d3e73d07b', day.id);
  // Then the inspection results of every third shot, as `plumbline demo` records them: the
  // reports above were made before they came, the POST /v1/drift-reports example after.
  await recordDemoOutcomes(app.store.outcomes, 'moulding-quality', replayed.shots);
  servers.metrics = await startDocServer();
}, 120_000);

afterAll(async () => {
  for (const s of Object.values(servers)) await s?.close();
});

describe('docs/api.md', () => {
  it('has examples, each run here against the server the doc names', () => {
    expect(examples.length).toBeGreaterThan(30);
  });

  for (const e of examples) {
    const name = serverFor(e);
    if (name === null) continue;
    it(`line ${e.line} (${e.section}): ${e.command.split('\n')[0]?.slice(0, 90)}`, async () => {
      const s = servers[name];
      const after = await before(e, name);
      const run = await runCommand(s.command(carry(e.command, seen)), s.env);
      await after?.();
      const output = run.output.replaceAll(s.server.url, 'http://127.0.0.1:8080').replaceAll(keyedModels, '/tmp/sec-doc-models');
      // The manifest's created_at is the bundle's, not a time of the run.
      const varying = e.output.includes('"format":"plumbline-bundle/2"') ? DEFAULT_VARYING.filter((k) => k !== 'created_at') : DEFAULT_VARYING;
      dumpOutput('api.md', e, output);
      // The rate limit's window counts down from its first request: on a slow machine the fourth
      // request comes more than a second after the first, and says 59 where the doc says 60.
      const problems = quoteProblems(output, e.output, { seen, varying, varyingHeaders: ['x-ratelimit-remaining', 'x-ratelimit-reset', 'retry-after'], varyingText: [/retry in \d+ s\b/] });
      expect(problems, problems.join('\n')).toEqual([]);
    });
  }

  it('shows a configuration file for the alerts example that the service accepts', () => {
    const block = fencedBlocks(DOC).find((b) => b.lang === 'json' && b.body.includes('"alerts"'));
    expect(block).toBeDefined();
    expect(configSchema.safeParse(JSON.parse(block?.body ?? '{}')).error).toBeUndefined();
  });

  it("quotes the HELP and TYPE lines of the service's metrics as /metrics writes them, and the counters of the run it describes", async () => {
    const block = examplesOf(DOC).find((e) => e.section === 'GET /metrics' && e.output.includes('# HELP'));
    const url = servers.metrics.server.url;
    // The run of GET /v1/alerts as far as the counters go: 20 faulted rows, 240 normal ones, 40
    // faulted ones again; the six refused /v1/alerts queries, two 405s, a score of 3 values and
    // one for a model that is not loaded. The alert rule's own gauges depend on its timing.
    const rows = (file: string, from: number, to: number): number[][] =>
      readFileSync(join(DEMO_DIR, file), 'utf8').trim().split('\n').slice(1 + from, 1 + to).map((l) => l.split(',').slice(1, 11).map(Number));
    const score = (features: unknown, model = 'moulding-quality') =>
      fetch(`${url}/v1/models/${model}/score`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ features }) });
    for (const r of [...rows('traffic-faulted.csv', 0, 20), ...rows('traffic-normal.csv', 0, 240), ...rows('traffic-faulted.csv', 20, 60)]) expect((await score(r)).status).toBe(200);
    for (const q of ['state=open', 'limit=501', 'from=2026-12-01', 'cursor=abc', 'model=a&model=b', 'rule=x']) expect((await fetch(`${url}/v1/alerts?${q}`)).status).toBe(400);
    for (const path of ['/v1/alerts', '/metrics']) expect((await fetch(`${url}${path}`, { method: 'POST' })).status).toBe(405);
    expect((await score([1, 2, 3])).status).toBe(400);
    expect((await score([1, 2, 3, 4, 5, 6, 7, 8, 9, 10], 'press-9')).status).toBe(404);
    const text = await (await fetch(`${url}/metrics`)).text();
    dumpOutput('api.md', block as Example, text);
    const lines = text.split('\n');
    const quoted = (block?.output ?? '').split('\n');
    const descriptions = quoted.filter((l) => /^# (HELP|TYPE) plumbline_/.test(l));
    expect(descriptions.length).toBeGreaterThan(10);
    for (const line of descriptions) expect(lines, line).toContain(line);
    const counters = quoted.filter((l) => /^plumbline_(scored|rejected)_total\{/.test(l));
    expect(counters.length).toBeGreaterThan(5);
    for (const line of counters) expect(lines, line).toContain(line);
  });
  it('gives, in its table of refused scores, the status and errors the service answers', async () => {
    // Each row of the table, with the body it abbreviates.
    const shot = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93];
    const byName = Object.fromEntries(['melt_temp_c', 'mould_temp_c', 'injection_pressure_bar', 'hold_pressure_bar', 'hold_time_s', 'cooling_time_s', 'screw_speed_rpm', 'cushion_mm', 'cycle_time_s', 'shot_weight_g'].map((f, i) => [f, shot[i]]));
    const rows: Array<[string, string, string?]> = [
      ['`{"features": [1,2,3]}`', '{"features": [1,2,3]}'],
      ['`{"features": {"melt_temp_c": "hot", ...}}`', JSON.stringify({ features: { ...byName, melt_temp_c: 'hot' } })],
      ['`{"features": [..., 2e15]}` (10th value)', JSON.stringify({ features: [...shot.slice(0, 9), 2e15] })],
      ['`{"features": [...], "tag": {}}`', JSON.stringify({ features: shot, tag: {} })],
      ['`{"features": [...], "tags": {"line": 3}}`', JSON.stringify({ features: shot, tags: { line: 3 } })],
      ['`{"features": [...], "tags": {"a/b~c": "<257 characters>"}}`', JSON.stringify({ features: shot, tags: { 'a/b~c': 'x'.repeat(257) } })],
      ['17 tags', JSON.stringify({ features: shot, tags: Object.fromEntries(Array.from({ length: 17 }, (_, i) => [`t${i}`, 'v'])) })],
      ['`{}`', '{}'],
      ['`[]`', '[]'],
      ['`{"features": [1,2`', '{"features": [1,2'],
      ['a 2 MB body', JSON.stringify({ features: shot, pad: 'x'.repeat(2_000_000) })],
      ['`content-type: text/plain`', JSON.stringify({ features: shot }), 'text/plain'],
    ];
    const table = DOC.split('\n').filter((l) => l.startsWith('| `{') || l.startsWith('| `[]') || l.startsWith('| 17 tags') || l.startsWith('| a 2 MB') || l.startsWith('| `content-type'));
    expect(table).toHaveLength(rows.length);
    for (const [cell, body, type] of rows) {
      const line = table.find((l) => l.startsWith(`| ${cell} |`));
      expect(line, cell).toBeDefined();
      const res = await fetch(`${servers.open.server.url}/v1/models/moulding-quality/score`, { method: 'POST', headers: { 'content-type': type ?? 'application/json' }, body });
      const problem = (await res.json()) as { type: string; errors?: Array<Record<string, string>> };
      const code = problem.type.replace('urn:plumbline:problem:', '');
      const [, status, errors] = (line as string).split(' | ');
      expect(status, cell).toBe(code === 'invalid-request' || code === 'unsupported-media-type' ? String(res.status) : `${res.status} \`${code}\``);
      const e = problem.errors?.[0];
      const shown = e === undefined ? 'none' : e.pointer !== undefined ? `\`${e.pointer}\`: "${e.detail}"` : `\`header\` \`${e.header}\`: "${e.detail}"`;
      expect(errors?.replace(/ \|$/, ''), cell).toBe(shown);
    }
  });

  it('gives, in its table of refused audit-log queries, the errors the service answers', async () => {
    const table = DOC.split('\n').filter((l) => /^\| `(from|tag|limit|in_domain|cursor|modle)=/.test(l));
    expect(table.length).toBe(7);
    for (const line of table) {
      const [queries, errors] = line.replace(/^\| /, '').split(' | ');
      const details: string[] = [];
      for (const q of [...(queries ?? '').matchAll(/`([^`]+)`/g)].map((m) => m[1] as string)) {
        const res = await fetch(`${servers.open.server.url}/v1/requests?${q}`);
        expect(res.status, q).toBe(400);
        const e = ((await res.json()) as { errors: Array<{ parameter: string; detail: string }> }).errors[0];
        details.push(`\`${e?.parameter}\`: ${JSON.stringify(e?.detail).replaceAll('|', '\\|')}`);
      }
      // One parameter per row; several queries of a row give one detail each (listed once when the same).
      const unique = [...new Set(details)];
      const param = unique[0]?.split(':')[0];
      const expected = `${param}: ${unique.map((d) => d.slice(d.indexOf(': ') + 2)).join(', ')} |`;
      expect(errors, line).toBe(expected);
    }
  });
  it('gives, in its sentences on other refusals, the errors the service answers', async () => {
    const section = (heading: string) => DOC.slice(DOC.indexOf(`## ${heading}\n`), DOC.indexOf('\n## ', DOC.indexOf(`## ${heading}\n`) + 4));
    let checked = 0;
    for (const [heading, path] of [['GET /v1/drift-reports', '/v1/drift-reports'], ['GET /v1/alerts', '/v1/alerts']] as const) {
      const text = section(heading).slice(section(heading).indexOf('Other refusals:')).replace(/\s+/g, ' ');
      for (const m of text.matchAll(/`([a-z_]+=[^`]+)` \(?[^`]*?\)? ?gives `(\w+)`: "((?:[^"\\]|\\.)*)"/g)) {
        const res = await fetch(`${servers.open.server.url}${path}?${m[1]}`);
        expect(res.status, m[1]).toBe(400);
        const e = ((await res.json()) as { errors: Array<{ parameter: string; detail: string }> }).errors[0];
        expect(`${e?.parameter}: ${e?.detail}`, `${path}?${m[1]}`).toBe(`${m[2]}: ${(m[3] as string).replaceAll('\\"', '"')}`);
        checked++;
      }
    }
    expect(checked).toBeGreaterThanOrEqual(8);
    // An empty batch, and one item too many.
    const batch = (items: unknown[]) => fetch(`${servers.open.server.url}/v1/models/moulding-quality/score-batch`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ items }) }).then((r) => r.json() as Promise<{ errors: Array<{ pointer: string; detail: string }> }>);
    const empty = (await batch([])).errors[0];
    const over = (await batch(Array.from({ length: 1001 }, () => ({ features: [1, 2, 3, 4, 5, 6, 7, 8, 9, 10] })))).errors[0];
    expect(DOC.replace(/\s+/g, ' ')).toContain(`An empty batch gives \`${empty?.pointer}\`: "${empty?.detail}", and 1,001 items give \`${over?.pointer}\`: "${over?.detail}".`);
  });
});
