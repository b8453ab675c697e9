import { copyFileSync, existsSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { pino } from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { formatMetrics } from '../../src/cli/actions/metrics-table.js';
import { domainWarnings } from '../../src/cli/actions/bundle-common.js';
import { createKeyAction } from '../../src/cli/actions/keys.js';
import { driftAction } from '../../src/cli/actions/drift.js';
import { configSchema } from '../../src/config/config.js';
import { recordDemoOutcomes } from '../../src/demo/outcomes.js';
import { type ReplayedShot, replayDemoDay } from '../../src/demo/replay.js';
import { openStore } from '../../src/store/store.js';
import { trainAction } from '../../src/cli/actions/train.js';
import { TRAIN_DEFAULTS } from '../../src/cli/commands/train.js';
import { startServer } from '../../src/http/server.js';
import { tempDir } from '../helpers/datasets.js';
import { DAY_START, DEMO_DIR, demoBundle } from '../helpers/demo.js';
import { type Example, asOfDocDay, dumpOutput, examplesOf, fencedBlocks, quoteProblems, readDoc, runCommand, REPO } from '../helpers/doc-examples.js';
import { sink } from '../helpers/sink.js';

// The examples of docs/cli.md, run as written (through `node --import tsx src/cli/main.ts`) on
// temporary files standing in for the paths the doc names, and held to the output it quotes.
// train's output is what train prints from the bundle it wrote: the test prints it from the
// committed demo bundle, which `npm run demo:build` writes with the same command (test/demo
// checks the rebuild byte for byte), rather than training fifteen networks again.

const DOC = readDoc('docs/cli.md');
const examples = examplesOf(DOC);
const tmp = tempDir('plumbline-doc-cli-');
const BUNDLE = join(DEMO_DIR, 'models/moulding-quality.bundle.json');
const bundle = (() => {
  const b = demoBundle();
  if (b.format !== 'plumbline-bundle/2') throw new Error('the demo bundle is not format 2');
  return b;
})();
const seen = new Map<string, string>();
const DAY = 86_400_000;
const quiet = () => ({ stdout: sink(), stderr: sink(), interactive: false });

/** Doc path → the temporary file standing in for it. */
const paths: Array<[string, string]> = [
  ['/tmp/plumbline-demo-5Y3yMu/demo.db', tmp.file('demo.db')],
  ['/tmp/moulding-quality.bundle.json', BUNDLE],
  ['/tmp/faulted.jsonl', tmp.file('faulted.jsonl')],
  ['/tmp/day.json', tmp.file('day.json')],
  ['/tmp/day.html', tmp.file('day.html')],
  ['var/plumbline.db', tmp.file('plumbline.db')],
  ['copy1.db', tmp.file('copy1.db')],
  ['copy2.db', tmp.file('copy2.db')],
  ['copy3.db', tmp.file('copy3.db')],
  ['/tmp/morning.csv', tmp.file('morning.csv')],
  ['/tmp/retrained.bundle.json', tmp.file('retrained.bundle.json')],
];
const toReal = (s: string): string => paths.reduce((t, [doc, real]) => t.replaceAll(doc, real), s);
const toDoc = (s: string): string => paths.reduce((t, [doc, real]) => t.replaceAll(real, doc), s);

/** The server the demo and serve examples start is on a port of the test's choosing. */
function fixPorts(command: string): string {
  return command.replace('--port 18401', '--port 0');
}
function docDates(output: string): string {
  return asOfDocDay(output, output.includes('plumbline demo:') ? 'http://127.0.0.1:18401' : 'http://127.0.0.1:8080');
}

let demoShots: ReplayedShot[] = [];
const isAudit = (e: Example) => e.section.startsWith('plumbline audit verify');
const isKeys = (e: Example) => e.section.startsWith('plumbline keys');

beforeAll(async () => {
  // The demo's audit log, for the drift example: the invented day replayed into a fresh database.
  const demo = await startServer(configSchema.parse({ port: 0, models_dir: join(DEMO_DIR, 'models'), db: tmp.file('demo.db'), logger: { level: 'silent' }, reports: { schedule: 'off' } }), { logger: pino({ level: 'silent' }), timers: false });
  demoShots = (await replayDemoDay(demo.app.scoring, 'moulding-quality', DEMO_DIR, DAY_START)).shots;
  await demo.close();
  // The keys examples: an admin key first, then the doc's scorer key (its own example).
  await createKeyAction({ db: tmp.file('plumbline.db'), role: 'admin', label: 'ops' }, quiet());
}, 120_000);
afterAll(() => tmp.remove());

/** Work the doc describes between its examples. */
async function before(e: Example): Promise<void> {
  if (e.command.includes(' export ') && !existsSync(tmp.file('morning.csv'))) {
    // The inspection results arrive after the drift example, as plumbline demo records them.
    const store = openStore(tmp.file('demo.db'), { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 1000, rejectedRows: 1000 });
    await recordDemoOutcomes(store.outcomes, 'moulding-quality', demoShots);
    store.close();
  }
  if (e.command.includes(' compare ') && !existsSync(tmp.file('retrained.bundle.json'))) {
    // The train example between export and compare, which this test does not run as a command.
    await trainAction({ ...TRAIN_DEFAULTS, detectors: [...TRAIN_DEFAULTS.detectors], data: tmp.file('morning.csv'), label: 'label', ignore: ['request_id', 'received_at'], featureInfo: join(REPO, 'demo-data/features.json'), name: 'moulding-quality', version: '2', out: tmp.file('retrained.bundle.json'), createdAt: new Date(1796112000 * 1000) }, quiet());
  }
  if (e.command.includes('keys revoke')) {
    // The reader key of the list below, made after the scorer key.
    const reader = await createKeyAction({ db: tmp.file('plumbline.db'), role: 'reader', label: 'quality engineer' }, quiet());
    seen.set('01a2341d-2461-7000-90d9-2ac3d1d99d0a', reader.id);
  }
  if (e.command.includes('keys list')) {
    // "After the scorer key above had been used once, and the reader key revoked"
    const db = tmp.file('plumbline.db');
    const scorer = seen.get('plk_mBwRXJvIBDs2-njCmrP9R-QRY1JkWiZQC1ssDiPE_QA') as string;
    const server = await startServer(configSchema.parse({ port: 0, models_dir: join(DEMO_DIR, 'models'), db, logger: { level: 'silent' }, reports: { schedule: 'off' } }), { logger: pino({ level: 'silent' }), timers: false });
    const res = await fetch(`${server.url}/v1/models/moulding-quality/score`, { method: 'POST', headers: { 'content-type': 'application/json', authorization: `Bearer ${scorer}` }, body: JSON.stringify({ features: [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93] }) });
    expect(res.status).toBe(200);
    await server.close();
  }
  if (e.command.includes('audit verify --db var/plumbline.db') && !e.command.includes('--json') && !seen.has('audit-rows')) {
    // "intact: 7 rows": seven answers in the log of the keys examples (one was scored above).
    const db = tmp.file('plumbline.db');
    const server = await startServer(configSchema.parse({ port: 0, models_dir: join(DEMO_DIR, 'models'), db, auth: 'off', logger: { level: 'silent' }, reports: { schedule: 'off' } }), { logger: pino({ level: 'silent' }), timers: false });
    const rows = readFileSync(join(DEMO_DIR, 'traffic-normal.csv'), 'utf8').trim().split('\n').slice(1, 7);
    for (const r of rows) {
      const res = await fetch(`${server.url}/v1/models/moulding-quality/score`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ features: r.split(',').slice(1, 11).map(Number) }) });
      expect(res.status).toBe(200);
    }
    await server.close();
    // "copies of the database above, each with its head file"
    for (const c of ['copy1.db', 'copy2.db', 'copy3.db']) {
      copyFileSync(db, tmp.file(c));
      copyFileSync(`${db}.head`, tmp.file(`${c}.head`));
    }
    seen.set('audit-rows', 'done');
  }
}

/** The keys examples in the order they were run: the reader key was revoked before the list. */
function inRunOrder(list: Example[]): Example[] {
  const revoke = list.find((e) => e.command.includes('keys revoke'));
  const others = list.filter((e) => e !== revoke);
  const at = others.findIndex((e) => e.command.includes('keys list'));
  return revoke ? [...others.slice(0, at), revoke, ...others.slice(at)] : others;
}

const VARYING_TEXT = [
  /plk_[A-Za-z0-9_-]{43}/,
  /plk_[A-Za-z0-9_-]{6}…/,
  /\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(?:\.\d{3})?Z/,
  /\b[0-9a-f]{64}\b/,
];

describe('docs/cli.md', () => {
  it('quotes what train prints for the committed demo bundle, which the train example writes', () => {
    const e = examples.find((x) => x.command.includes(' train'));
    expect(e?.output).toBe('');
    // The output is the block after the sentence "Standard output (exit code 0), as the code prints it".
    const block = fencedBlocks(DOC).find((b) => b.body.startsWith('model moulding-quality version 1:'));
    const printed = `${formatMetrics(bundle)}\nbundle /tmp/moulding-quality.bundle.json\nsha256 ${bundle.sha256}`;
    expect(block?.body).toBe(printed);
    expect(domainWarnings(bundle)).toEqual([]);
    expect(DOC).toContain(`Standard error begins with \`read ${bundle.training.rows.total} rows, ${bundle.features.length} features, ${bundle.classes.length} classes from demo-data/training.csv\``);
  });

  it('says what the demo bundle holds, in the sentences after the train example', () => {
    const m = bundle.training.metrics.held_out;
    const cal = bundle.training.metrics.calibration;
    const held = bundle.domain.held_out;
    const best = bundle.training.members.map((x) => x.best_epoch);
    expect(DOC).toContain(`best epochs ${best.slice(0, -1).join(', ')} and ${best.at(-1)}`);
    expect(bundle.training.members.every((x) => x.stopped_early && x.epochs_run - x.best_epoch === bundle.training.options.patience)).toBe(true);
    expect(m).not.toBeNull();
    expect(DOC).toContain(`log-loss falls from ${cal?.before?.log_loss.toFixed(4)} to ${cal?.after?.log_loss.toFixed(4)} and its ECE\nfrom ${cal?.before?.ece.toFixed(4)} to ${cal?.after?.ece.toFixed(4)}`);
    const alarms = Math.round(held.false_alarm_rate * held.rows);
    expect(DOC).toContain(`It was calibrated to pass ${held.level} of the ${held.rows.toLocaleString('en')}\nout-of-fold rows; ${alarms} of them fail it left out one at a time, a false-alarm rate of ${held.false_alarm_rate} with a\n95 % Clopper–Pearson interval of ${held.false_alarm_ci?.low.toFixed(4)} to ${held.false_alarm_ci?.high.toFixed(4)}`);
    const cushion = bundle.features.findIndex((f) => f.name === 'cushion_mm');
    const env = bundle.domain.envelope;
    expect(DOC).toContain(`\`cushion_mm\` has the training range ${env.range.low[cushion]} to ${env.range.high[cushion]} mm and\nthe envelope ${env.low[cushion]} to ${env.high[cushion]} mm (t = ${env.tolerance})`);
  });

  for (const e of inRunOrder(examples)) {
    if (e.command.includes(' train')) continue;
    it(`line ${e.line} (${e.section.slice(0, 40)}): ${e.command.split('\n')[0]?.slice(0, 80)}`, async () => {
      await before(e);
      // serve starts on a database without keys, as the warning it prints says.
      let command = fixPorts(toReal(e.command.includes(' serve ') ? e.command.replace('var/plumbline.db', tmp.file('serve.db')) : e.command));
      for (const [doc, actual] of seen) if (doc.length >= 6) command = command.replaceAll(doc, actual);
      const serve = e.command.includes(' serve ');
      // demo's warnings go to standard error, and the doc shows its standard output.
      const run = await runCommand(command, serve ? { PLUMBLINE_PORT: '0' } : {}, { until: serve ? /"msg":"serving"/ : undefined, stdoutOnly: e.command.includes(' demo ') });
      const output = docDates(toDoc(run.output.replaceAll(tmp.file('serve.db'), 'var/plumbline.db')));
      dumpOutput('cli.md', e, output);
      const problems = quoteProblems(output, e.output, { seen, varyingText: isKeys(e) || isAudit(e) ? VARYING_TEXT : [] });
      expect(problems, problems.join('\n')).toEqual([]);
      if (e.command.includes('score --bundle')) expect(run.code).toBe(0);
    });
  }

  it('shows the first line of the faulted file as score wrote it', () => {
    const block = fencedBlocks(DOC).find((b) => b.lang === 'json' && b.body.includes('"line": 2'));
    const first = readFileSync(tmp.file('faulted.jsonl'), 'utf8').split('\n')[0] as string;
    const problems = quoteProblems(first, block?.body ?? '', { seen });
    expect(problems, problems.join('\n')).toEqual([]);
  });

  it('shows what score says of a row with a bad value', async () => {
    // "a four-line copy of traffic-normal.csv with one field edited"
    const lines = readFileSync(join(DEMO_DIR, 'traffic-normal.csv'), 'utf8').split('\n').slice(0, 4);
    const header = (lines[0] as string).split(',');
    const row = (lines[2] as string).split(',');
    row[header.indexOf('injection_pressure_bar')] = '92x1';
    lines[2] = row.join(',');
    writeFileSync(tmp.file('bad.csv'), `${lines.join('\n')}\n`);
    const run = await runCommand(`npx tsx src/cli/main.ts score --bundle ${BUNDLE} --data ${tmp.file('bad.csv')} > /dev/null`);
    expect(run.code).toBe(1);
    const quoted = fencedBlocks(DOC).find((b) => b.body.startsWith('bad.csv, line 3') && b.body.includes('scored'));
    expect(run.output.replaceAll(tmp.file('bad.csv'), 'bad.csv').trimEnd()).toBe(quoted?.body);
  });

  it('gives the figures that move with --sample-cap 500', async () => {
    const io = { stdout: sink(), stderr: sink(), interactive: false };
    const full = await driftAction({ db: tmp.file('demo.db'), model: 'moulding-quality', from: new Date(DAY_START), to: new Date(DAY_START + DAY), minRows: 30, sampleCap: 10_000 }, io);
    const capped = await driftAction({ db: tmp.file('demo.db'), model: 'moulding-quality', from: new Date(DAY_START), to: new Date(DAY_START + DAY), minRows: 30, sampleCap: 500 }, io);
    const d = (r: typeof full) => r.features.find((f) => f.name === 'shot_weight_g')?.ks.d?.toFixed(3);
    expect(DOC).toContain(`(\`shot_weight_g\`: KS D ${d(capped)} instead of ${d(full)})`);
    expect(DOC).toContain(`"${capped.findings.at(-1)}"`);
  });

  it('gives the sizes of the report files the drift example writes', () => {
    const kb = (f: string) => Math.round(statSync(tmp.file(f)).size / 1000);
    expect(DOC).toContain(`\`/tmp/day.json\` holds the report (${kb('day.json')} kB) and \`/tmp/day.html\` its page\n(${kb('day.html')} kB)`);
  });
});
