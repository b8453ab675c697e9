import { readFile } from 'node:fs/promises';
import { z } from 'zod';
import { type BundleFile, type FeatureInfo, featureSchema, modelNameSchema, modelVersionSchema } from '../../bundle/schema.js';
import { votingDetectors } from './metrics-table.js';
import type { LabelledTable } from '../../bundle/train-bundle.js';
import { BundleError, parseBundle } from '../../bundle/verify.js';
import { serializeBundle, writeBundle } from '../../bundle/write.js';
import { LabelOrderError, indexLabels, readLabelledCsv } from '../../io/feature-table.js';
import { type CliIo, UsageError, fileProblem } from '../io.js';
import { formatMetrics } from './metrics-table.js';

// What `train` and `bundle` share: checking the name, reading the labelled data, and writing a
// bundle only once it reads back.

export function checkNameAndVersion(name: string, version: string): void {
  const n = modelNameSchema.safeParse(name);
  if (!n.success) throw new UsageError(`--name ${JSON.stringify(name)} ${n.error.issues[0]?.message}`);
  const v = modelVersionSchema.safeParse(version);
  if (!v.success) throw new UsageError(`--version ${JSON.stringify(version)} ${v.error.issues[0]?.message}`);
}

/** The labelled CSV as a table, its classes sorted (or in the order given), with names checked. */
export async function readTable(ctx: { data: string; label: string; features?: string[]; ignore?: string[]; featureInfo?: string; classes?: string[] }, io: CliIo): Promise<{ table: LabelledTable; sha256: string }> {
  const csv = await readLabelledCsv(ctx.data, { label: ctx.label, ...(ctx.features ? { features: ctx.features } : {}), ...(ctx.ignore ? { ignore: ctx.ignore } : {}) });
  let indexed: ReturnType<typeof indexLabels>;
  try {
    indexed = indexLabels(csv.labels, ctx.classes);
  } catch (err) {
    if (err instanceof LabelOrderError) throw new UsageError(`${ctx.data}: ${err.message} (--classes)`);
    throw err;
  }
  const { classes, indices } = indexed;
  if (classes.length < 2) throw new UsageError(`${ctx.data}: column ${JSON.stringify(ctx.label)} holds a single class (${classes[0]}); a classifier needs two or more`);
  const badClass = classes.find((c) => !featureSchema.shape.name.safeParse(c).success);
  if (badClass !== undefined) throw new UsageError(`${ctx.data}: class ${JSON.stringify(badClass)} is not a usable name (1-64 printable characters)`);
  const features = await readFeatureInfo(ctx.featureInfo, csv.featureNames);
  const badFeature = features.find((f) => !featureSchema.shape.name.safeParse(f.name).success);
  if (badFeature) throw new UsageError(`${ctx.data}: column ${JSON.stringify(badFeature.name)} is not a usable feature name (1-64 printable characters)`);
  io.stderr.write(`read ${csv.rows} rows, ${features.length} features, ${classes.length} classes from ${ctx.data}\n`);
  return { table: { features, x: csv.x, rows: csv.rows, labels: indices, classes }, sha256: csv.sha256 };
}

/** Reads back what is about to be written (a bundle that would be refused is never written), writes it, and reports. */
export async function writeVerifiedBundle(bundle: BundleFile, out: string, io: CliIo, what: string): Promise<void> {
  try {
    parseBundle(serializeBundle(bundle), out);
  } catch (err) {
    if (err instanceof BundleError) throw new UsageError(`the ${what} bundle does not verify, so it was not written: ${err.message}`);
    throw err;
  }
  try {
    await writeBundle(out, bundle);
  } catch (err) {
    throw fileProblem('--out', out, err);
  }
  for (const w of domainWarnings(bundle)) io.stderr.write(`warning: ${w}\n`);
  io.stdout.write(`${formatMetrics(bundle)}\nbundle ${out}\nsha256 ${bundle.sha256}\n`);
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

/** What a user should know about the domain flag's calibration before trusting its rate. */
export function domainWarnings(b: BundleFile): string[] {
  const h = b.domain.held_out;
  const target = b.domain.target_in_domain_rate;
  const out: string[] = [];
  if (h.level < target) {
    const voting = votingDetectors(b).length;
    // One detector needs (n + 1) p <= n rows, i.e. n >= p / (1 - p); several voting together need more.
    out.push(
      `the domain flag is calibrated to pass ${h.level.toFixed(4)}, not ${target}: ${h.rows} held-out rows cannot support more for ${voting} detector${voting === 1 ? '' : 's'} voting together ` +
        `(one alone needs ${Math.ceil(target / (1 - target))}); expect about ${(1 - h.level).toFixed(3)} of in-domain rows flagged (give more data, fewer --detectors, or --calibrate-on FILE)`,
    );
  }
  // Leave-one-out, the pass rate falls short of the level by at most one row unless a detector could not reach it.
  if (h.rows > 0 && h.in_domain_rate < h.level - 1 / h.rows) {
    const envelope = b.domain.evaluation.pass_rate.envelope ?? 1;
    out.push(
      `the domain flag passes ${h.in_domain_rate.toFixed(4)} of held-out rows, below the ${h.level.toFixed(4)} it was calibrated to${envelope < h.level ? `; the envelope alone passes ${envelope.toFixed(4)} (its tolerance is capped at one whole range)` : ''}`,
    );
  }
  return out;
}
