import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { scoreAction } from '../../src/cli/actions/score.js';
import type { ScoreResponse } from '../../src/contracts/score.js';
import { tempDir } from '../helpers/datasets.js';
import { DEMO_DIR, demoBundle } from '../helpers/demo.js';
import { readDoc } from '../helpers/doc-examples.js';
import { sink } from '../helpers/sink.js';

// demo-data/README.md describes the committed demo bundle and what it answers on the three
// traffic files. Every figure is recomputed here: from the bundle's own sections, from the CSV
// files, and from `plumbline score` run on each traffic file.

const DOC = readDoc('demo-data/README.md');
const BUNDLE = join(DEMO_DIR, 'models/moulding-quality.bundle.json');
const bundle = (() => {
  const b = demoBundle();
  if (b.format !== 'plumbline-bundle/2') throw new Error('the demo bundle is not format 2');
  return b;
})();
const tmp = tempDir('plumbline-doc-demo-');
const FILES = ['traffic-normal.csv', 'traffic-drifted.csv', 'traffic-faulted.csv'] as const;
const n = (x: number) => x.toLocaleString('en');

interface Scored {
  answer: ScoreResponse & { line: number };
  outcome: string;
}
const scored: Record<string, Scored[]> = {};

function outcomes(file: string): string[] {
  return readFileSync(join(DEMO_DIR, file), 'utf8').trim().split('\n').slice(1).map((l) => l.split(',').at(-1) as string);
}

beforeAll(async () => {
  for (const file of FILES) {
    const out = tmp.file(`${file}.jsonl`);
    await scoreAction({ bundle: BUNDLE, data: join(DEMO_DIR, file), out, batchSize: 1024 }, { stdout: sink(), stderr: sink(), interactive: false });
    const truth = outcomes(file);
    scored[file] = readFileSync(out, 'utf8').trim().split('\n').map((l) => {
      const answer = JSON.parse(l) as Scored['answer'];
      return { answer, outcome: truth[answer.line - 2] as string };
    });
  }
}, 120_000);
afterAll(() => tmp.remove());

/** The row of the traffic table for one file, as the README writes it. */
function trafficRow(file: string): string {
  const rows = scored[file] as Scored[];
  const ood = rows.filter((r) => !r.answer.domain.in_domain);
  const envelope = ood.filter((r) => r.answer.domain.checks.some((c) => c.detector === 'envelope' && !c.passed));
  const named = new Map<string, number>();
  for (const r of rows) for (const o of r.answer.domain.outside) named.set(o.feature, (named.get(o.feature) ?? 0) + 1);
  const namedText = [...named].sort((a, b) => b[1] - a[1]).map(([f, k]) => `\`${f}\` (${n(k)})`).join(', ') || 'none';
  const review = rows.filter((r) => r.answer.review).length;
  const right = rows.filter((r) => r.answer.label === r.outcome).length / rows.length;
  return `| \`${file}\` | ${n(ood.length)} of ${n(rows.length)} | ${n(envelope.length)} | ${namedText} | ${n(review)} | ${(100 * right).toFixed(1)} % |`;
}

describe('demo-data/README.md', () => {
  it('counts the outcomes of each file as the files hold them', () => {
    const files = ['training.csv', ...FILES];
    const counts = files.map((f) => outcomes(f));
    for (const cls of bundle.classes) {
      const c = counts.map((o) => o.filter((x) => x === cls).length);
      const share = (100 * (c[0] as number)) / (counts[0] as string[]).length;
      expect(DOC).toContain(`| \`${cls}\` | ${n(c[0] as number)} (${share.toFixed(1)} %) | ${c.slice(1).map(n).join(' | ')} |`);
    }
  });

  it("describes the bundle's training as its sections record it", () => {
    const t = bundle.training;
    const o = t.options;
    expect(DOC).toContain(`hidden layers\n${(o.hidden as number[]).join(',')} with ReLU, at most ${o.epochs} epochs, batch ${o.batch_size}, learning rate ${o.learning_rate}, weight decay ${o.weight_decay},\npatience ${o.patience}, seed ${t.seed}, ${o.folds} folds`);
    const best = t.members.map((m) => m.best_epoch);
    const runs = t.members.map((m) => m.epochs_run);
    expect(DOC).toContain(`stopped early after ${Math.min(...runs)} to ${Math.max(...runs)} epochs, keeping the weights of its best\nepoch (${best.join(', ')})`);
  });

  it('gives the held-out metrics the bundle stores', () => {
    const m = bundle.training.metrics.held_out;
    const c = bundle.training.metrics.calibration;
    expect(m).not.toBeNull();
    expect(DOC).toContain(`| accuracy (share of rows whose top class is the recorded outcome) | ${m?.accuracy.toFixed(4)} |`);
    expect(DOC).toContain(`| macro-F1 (unweighted mean of the five per-class F1 scores) | ${m?.macro_f1.toFixed(4)} |`);
    expect(DOC).toContain(`probabilities are the mean of the members' softmax(logits / T)) | ${c?.temperature.toFixed(4)} |`);
    expect(DOC).toContain(`| ECE before temperature scaling (15 equal-width bins of the top probability) | ${c?.before?.ece.toFixed(4)} |`);
    expect(DOC).toContain(`| ECE after temperature scaling | ${c?.after?.ece.toFixed(4)} |`);
    for (const cls of bundle.classes) {
      const p = m?.per_class[cls];
      expect(DOC).toContain(`| \`${cls}\` | ${p?.precision.toFixed(3)} | ${p?.recall.toFixed(3)} | ${p?.f1.toFixed(3)} | ${p?.support} |`);
    }
  });

  it("lists the bundle's training ranges and envelope", () => {
    const e = bundle.domain.envelope;
    bundle.features.forEach((f, j) => {
      expect(DOC).toContain(`| \`${f.name}\` | ${e.range.low[j]} | ${e.range.high[j]} | ${e.low[j]} | ${e.high[j]} | ${f.unit} |`);
    });
  });

  it('gives what score answers on each traffic file', () => {
    for (const file of FILES) expect(DOC).toContain(trafficRow(file));
  });

  it('reads the faulted file with the figures score gave', () => {
    const rows = scored['traffic-faulted.csv'] as Scored[];
    const sink_ = rows.filter((r) => r.answer.label === 'sink_marks');
    const confident = sink_.filter((r) => r.answer.margin >= 0.8).length;
    const truly = rows.filter((r) => r.outcome === 'sink_marks').length;
    const allChecks = rows.filter((r) => r.answer.domain.checks.every((c) => !c.passed)).length;
    expect(DOC).toContain(`it labels ${sink_.length} of the 1,000 shots\n\`sink_marks\` (${truly} are), ${confident} of them with a margin of at least 0.8.`);
    expect(rows.every((r) => r.answer.domain.checks.some((c) => c.detector === 'envelope' && !c.passed))).toBe(true);
    expect(DOC).toContain(`every row fails the envelope, and ${n(allChecks)} of them fail on the envelope and on both Mahalanobis distances`);
    // The normal and drifted files: flagged rows inside the envelope.
    const inside = (file: string) => (scored[file] as Scored[]).filter((r) => !r.answer.domain.in_domain && r.answer.domain.checks.every((c) => c.detector !== 'envelope' || c.passed)).length;
    const ood = (file: string) => (scored[file] as Scored[]).filter((r) => !r.answer.domain.in_domain).length;
    expect(DOC).toContain(`On the normal file ${inside('traffic-normal.csv')} of\nthe ${ood('traffic-normal.csv')} flagged rows are inside the envelope`);
    expect(DOC).toContain(`On the drifted file ${inside('traffic-drifted.csv')} of the ${ood('traffic-drifted.csv')} are\ninside the envelope too`);
  });
});
