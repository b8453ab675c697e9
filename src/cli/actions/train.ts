import { readFile } from 'node:fs/promises';
import cliProgress from 'cli-progress';
import { z } from 'zod';
import type { DetectorName } from '../../core/domain/detectors.js';
import type { EpochReport, TrainOptions } from '../../core/train.js';
import { type BundleFile, type FeatureInfo, featureSchema, modelNameSchema, modelVersionSchema } from '../../bundle/schema.js';
import { type TrainedBundle, trainBundle } from '../../bundle/train-bundle.js';
import { BundleError, parseBundle } from '../../bundle/verify.js';
import { serializeBundle, writeBundle } from '../../bundle/write.js';
import { indexLabels, readFeatureCsv, readLabelledCsv } from '../../io/feature-table.js';
import { type CliIo, UsageError, fileProblem } from '../io.js';
import { formatMetrics } from './metrics-table.js';

export interface TrainContext extends TrainOptions {
  data: string;
  label: string;
  features?: string[];
  featureInfo?: string;
  name: string;
  version: string;
  out: string;
  validationFraction: number;
  balance: boolean;
  tolerance: number;
  reviewMargin: number;
  /** Detectors besides the envelope that vote on the domain flag. */
  detectors: readonly DetectorName[];
  inDomainRate: number;
  /** CSV of held-out in-domain rows to calibrate the flag on, instead of the validation split. */
  calibrateOn?: string;
  createdAt: Date;
}

const featureInfoFile = z.record(z.string(), featureSchema.omit({ name: true }).partial());

/** Units and descriptions for the features, from a JSON object keyed by feature name. */
export async function readFeatureInfo(path: string | undefined, names: string[]): Promise<FeatureInfo[]> {
  if (path === undefined) return names.map((name) => ({ name, unit: '', description: '' }));
  let json: unknown;
  try {
    json = JSON.parse(await readFile(path, 'utf8'));
  } catch (err) {
    throw new UsageError(`--feature-info ${path}: ${(err as Error).message}`);
  }
  const parsed = featureInfoFile.safeParse(json);
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    throw new UsageError(`--feature-info ${path}: ${issue?.path.join('.') ?? ''} ${issue?.message ?? 'is not valid'}`);
  }
  const unknown = Object.keys(parsed.data).filter((k) => !names.includes(k));
  if (unknown.length > 0) throw new UsageError(`--feature-info ${path}: ${unknown.map((u) => JSON.stringify(u)).join(', ')} ${unknown.length === 1 ? 'is' : 'are'} not among the features (${names.join(', ')})`);
  return names.map((name) => ({ name, unit: parsed.data[name]?.unit ?? '', description: parsed.data[name]?.description ?? '' }));
}

function progressReporter(io: CliIo): { onEpoch: (r: EpochReport) => void; stop: () => void } {
  if (io.interactive) {
    const bar = new cliProgress.SingleBar(
      // noTTYOutput: whether to draw was decided by io.interactive; cli-progress need not guess again.
      { stream: io.stderr, format: 'training [{bar}] epoch {value}/{total}  loss {train}  validation {val}  best epoch {best}', hideCursor: true, noTTYOutput: true },
      cliProgress.Presets.shades_classic,
    );
    let started = false;
    return {
      onEpoch(r) {
        const payload = { train: r.trainLoss.toFixed(4), val: r.validationLoss?.toFixed(4) ?? '-', best: r.bestEpoch };
        if (!started) {
          bar.start(r.epochs, r.epoch, payload);
          started = true;
        } else bar.update(r.epoch, payload);
      },
      stop: () => started && bar.stop(),
    };
  }
  return {
    onEpoch(r) {
      if (r.epoch === 1 || r.epoch % 10 === 0) {
        io.stderr.write(`epoch ${r.epoch}/${r.epochs} loss ${r.trainLoss.toFixed(4)} validation ${r.validationLoss?.toFixed(4) ?? '-'} best epoch ${r.bestEpoch}\n`);
      }
    },
    stop: () => undefined,
  };
}

/** What a user should know about the domain flag's calibration before trusting its rate. */
export function domainWarnings(b: BundleFile): string[] {
  const h = b.domain.held_out;
  const target = b.domain.target_in_domain_rate;
  const out: string[] = [];
  // A conformal threshold at level p needs (n + 1) p <= n held-out rows, i.e. n >= p / (1 - p).
  const needed = Math.ceil(target / (1 - target));
  if (h.rows < needed) {
    out.push(`only ${h.rows} held-out rows calibrate the domain flag; ${needed} or more are needed for a pass rate of ${target}, so expect more false alarms than ${(1 - target).toFixed(3)} (give --calibrate-on FILE, or more data)`);
  }
  if (h.in_domain_rate < target) {
    const envelope = b.domain.evaluation.pass_rate.envelope ?? 1;
    out.push(
      `the domain flag passes ${h.in_domain_rate.toFixed(4)} of held-out rows, below the target ${target}${envelope < target ? `; the envelope alone passes ${envelope.toFixed(4)}` : ''}`,
    );
  }
  return out;
}

/** `plumbline train`: CSV in, verified bundle out, metrics on the terminal. */
export async function trainAction(ctx: TrainContext, io: CliIo): Promise<TrainedBundle> {
  const name = modelNameSchema.safeParse(ctx.name);
  if (!name.success) throw new UsageError(`--name ${JSON.stringify(ctx.name)} ${name.error.issues[0]?.message}`);
  const version = modelVersionSchema.safeParse(ctx.version);
  if (!version.success) throw new UsageError(`--version ${JSON.stringify(ctx.version)} ${version.error.issues[0]?.message}`);

  const table = await readLabelledCsv(ctx.data, { label: ctx.label, ...(ctx.features ? { features: ctx.features } : {}) });
  const { classes, indices } = indexLabels(table.labels);
  if (classes.length < 2) throw new UsageError(`${ctx.data}: column ${JSON.stringify(ctx.label)} holds a single class (${classes[0]}); a classifier needs two or more`);
  const badClass = classes.find((c) => !featureSchema.shape.name.safeParse(c).success);
  if (badClass !== undefined) throw new UsageError(`${ctx.data}: class ${JSON.stringify(badClass)} is not a usable name (1-64 printable characters)`);
  const features = await readFeatureInfo(ctx.featureInfo, table.featureNames);
  const badFeature = features.find((f) => !featureSchema.shape.name.safeParse(f.name).success);
  if (badFeature) throw new UsageError(`${ctx.data}: column ${JSON.stringify(badFeature.name)} is not a usable feature name (1-64 printable characters)`);

  const calibrateOn = ctx.calibrateOn === undefined ? undefined : await readFeatureCsv(ctx.calibrateOn, table.featureNames);
  io.stderr.write(`read ${table.rows} rows, ${features.length} features, ${classes.length} classes from ${ctx.data}\n`);
  if (calibrateOn) io.stderr.write(`read ${calibrateOn.rows} calibration rows from ${ctx.calibrateOn}\n`);
  const counts = classes.map((_, k) => indices.filter((i) => i === k).length);
  classes.forEach((c, k) => {
    // Fewer than 10 rows leave one or two for validation: its metrics say little.
    if ((counts[k] as number) < 10) io.stderr.write(`warning: class ${JSON.stringify(c)} has only ${counts[k]} row${counts[k] === 1 ? '' : 's'}; its validation metrics are unreliable\n`);
  });
  const progress = progressReporter(io);
  let trained: TrainedBundle;
  try {
    const { calibrateOn: _path, ...options } = ctx;
    trained = trainBundle(
      { features, x: table.x, rows: table.rows, labels: indices, classes },
      {
        ...options,
        ...(calibrateOn ? { calibrateOn } : {}),
        dataSha256: table.sha256,
        labelColumn: ctx.label,
      },
      progress.onEpoch,
    );
  } finally {
    progress.stop();
  }
  // Read back what is about to be written: a bundle that would be refused is never written.
  try {
    parseBundle(serializeBundle(trained.bundle), ctx.out);
  } catch (err) {
    if (err instanceof BundleError) throw new UsageError(`the trained bundle does not verify, so it was not written: ${err.message}`);
    throw err;
  }
  try {
    await writeBundle(ctx.out, trained.bundle);
  } catch (err) {
    throw fileProblem('--out', ctx.out, err);
  }
  for (const w of domainWarnings(trained.bundle)) io.stderr.write(`warning: ${w}\n`);
  io.stdout.write(`${formatMetrics(trained.bundle)}\nbundle ${ctx.out}\nsha256 ${trained.bundle.sha256}\n`);
  return trained;
}
