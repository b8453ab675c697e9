import { readFile } from 'node:fs/promises';
import { basename } from 'node:path';
import { z } from 'zod';
import type { DetectorName } from '../../core/domain/detectors.js';
import type { Standardizer } from '../../core/standardize.js';
import { ImportMismatchError, importBundle } from '../../bundle/import-bundle.js';
import type { BundleFile } from '../../bundle/schema.js';
import { type ImportedGraph, readOnnx } from '../../io/onnx/index.js';
import { indexLabels, readLabelledCsv } from '../../io/feature-table.js';
import { type CliIo, UsageError } from '../io.js';
import { checkNameAndVersion, readTable, writeVerifiedBundle } from './bundle-common.js';

export interface ImportContext {
  onnx: string;
  data: string;
  label: string;
  features?: string[];
  featureInfo?: string;
  classes?: string[];
  preprocess?: string;
  calibrateOn?: string;
  name: string;
  version: string;
  out: string;
  tolerance: number;
  reviewMargin: number;
  detectors: readonly DetectorName[];
  inDomainRate: number;
  /** Keep in the vote a detector that separates no probe family. */
  keepWeak: boolean;
  seed: number;
  createdAt: Date;
}

const preprocessFile = z.strictObject({ mean: z.array(z.number()).min(1), scale: z.array(z.number().positive()).min(1) }).refine((p) => p.mean.length === p.scale.length, 'mean and scale must be as long as each other');

async function readPreprocess(path: string): Promise<Standardizer> {
  let json: unknown;
  try {
    json = JSON.parse(await readFile(path, 'utf8'));
  } catch (err) {
    throw new UsageError(`--preprocess ${path}: ${(err as Error).message}`);
  }
  const parsed = preprocessFile.safeParse(json);
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    throw new UsageError(`--preprocess ${path}: ${issue?.path.join('.') || 'the file'} ${issue?.message ?? 'is not valid'}; it must be {"mean": [...], "scale": [...]} with positive scales`);
  }
  return parsed.data;
}

/**
 * `plumbline import --onnx`: a network trained elsewhere, exported as ONNX, sealed into a bundle with
 * the reference statistics and domain detectors of the data it was trained on.
 */
export async function importAction(ctx: ImportContext, io: CliIo): Promise<{ bundle: BundleFile; graph: ImportedGraph }> {
  checkNameAndVersion(ctx.name, ctx.version);
  const preprocess = ctx.preprocess === undefined ? undefined : await readPreprocess(ctx.preprocess);
  const graph = await readOnnx(ctx.onnx, preprocess);
  io.stderr.write(`read ${ctx.onnx}: ${graph.network.layers.length} dense layers (${graph.network.layers.map((l) => `${l.inputs}->${l.outputs} ${l.activation}`).join(', ')}), operator set ${graph.opset}, from ${graph.producer}\n`);
  const { table, sha256 } = await readTable(ctx, io);
  let calibrateOn: { x: Float64Array; rows: number; labels: Int32Array } | undefined;
  if (ctx.calibrateOn !== undefined) {
    const cal = await readLabelledCsv(ctx.calibrateOn, { label: ctx.label, features: table.features.map((f) => f.name) });
    let labels: Int32Array;
    try {
      labels = indexLabels(cal.labels, table.classes).indices;
    } catch (err) {
      throw new UsageError(`${ctx.calibrateOn}: ${(err as Error).message}`);
    }
    calibrateOn = { x: cal.x, rows: cal.rows, labels };
    io.stderr.write(`read ${cal.rows} labelled calibration rows from ${ctx.calibrateOn}\n`);
  }
  let bundle: BundleFile;
  try {
    bundle = importBundle(table, graph, {
      name: ctx.name,
      version: ctx.version,
      createdAt: ctx.createdAt,
      tolerance: ctx.tolerance,
      reviewMargin: ctx.reviewMargin,
      detectors: ctx.detectors,
      inDomainRate: ctx.inDomainRate,
      keepWeak: ctx.keepWeak,
      seed: ctx.seed,
      dataSha256: sha256,
      labelColumn: ctx.label,
      onnxFile: basename(ctx.onnx),
      preprocessGiven: preprocess !== undefined,
      ...(calibrateOn ? { calibrateOn } : {}),
    }).bundle;
  } catch (err) {
    if (err instanceof ImportMismatchError) throw new UsageError(`${ctx.onnx} and ${ctx.data} do not fit together: ${err.message} (see --features and --classes)`);
    throw err;
  }
  await writeVerifiedBundle(bundle, ctx.out, io, 'imported');
  return { bundle, graph };
}
