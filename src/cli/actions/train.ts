import cliProgress from 'cli-progress';
import type { DetectorName } from '../../core/domain/detectors.js';
import type { TrainOptions } from '../../core/train.js';
import type { MemberEpochReport } from '../../bundle/cross-fit.js';
import { type TrainedBundle, trainBundle } from '../../bundle/train-bundle.js';
import { readFeatureCsv } from '../../io/feature-table.js';
import { type CliIo, UsageError } from '../io.js';
import { checkNameAndVersion, readTable, writeVerifiedBundle } from './bundle-common.js';

export interface TrainContext extends TrainOptions {
  data: string;
  label: string;
  features?: string[];
  /** Columns that are neither features nor the label (ids, times), when features are not listed. */
  ignore?: string[];
  featureInfo?: string;
  name: string;
  version: string;
  out: string;
  /** K of cross-fitting; 1 trains one network beside a hold-out. */
  folds: number;
  validationFraction: number;
  balance: boolean;
  tolerance: number;
  reviewMargin: number;
  /** Detectors besides the envelope that vote on the domain flag. */
  detectors: readonly DetectorName[];
  inDomainRate: number;
  /** Keep in the vote a detector that separates no probe family. */
  keepWeak: boolean;
  /** CSV of held-out in-domain rows to calibrate the flag on, instead of the validation split. */
  calibrateOn?: string;
  createdAt: Date;
}

function progressReporter(io: CliIo): { onEpoch: (r: MemberEpochReport) => void; stop: () => void } {
  if (io.interactive) {
    const bar = new cliProgress.SingleBar(
      // noTTYOutput: whether to draw was decided by io.interactive; cli-progress need not guess again.
      { stream: io.stderr, format: 'training {member} [{bar}] epoch {value}/{total}  loss {train}  validation {val}  best epoch {best}', hideCursor: true, noTTYOutput: true },
      cliProgress.Presets.shades_classic,
    );
    let started = false;
    return {
      onEpoch(r) {
        const payload = { member: r.members > 1 ? `network ${r.member + 1}/${r.members}` : 'network', train: r.trainLoss.toFixed(4), val: r.validationLoss?.toFixed(4) ?? '-', best: r.bestEpoch };
        if (!started) {
          bar.start(r.epochs, r.epoch, payload);
          started = true;
        } else if (r.epoch === 1) bar.start(r.epochs, r.epoch, payload);
        else bar.update(r.epoch, payload);
      },
      stop: () => started && bar.stop(),
    };
  }
  return {
    onEpoch(r) {
      if (r.epoch === 1 || r.epoch % 10 === 0) {
        io.stderr.write(`${r.members > 1 ? `network ${r.member + 1}/${r.members} ` : ''}epoch ${r.epoch}/${r.epochs} loss ${r.trainLoss.toFixed(4)} validation ${r.validationLoss?.toFixed(4) ?? '-'} best epoch ${r.bestEpoch}\n`);
      }
    },
    stop: () => undefined,
  };
}

/** `plumbline train`: CSV in, verified bundle out, metrics on the terminal. */
export async function trainAction(ctx: TrainContext, io: CliIo): Promise<TrainedBundle> {
  checkNameAndVersion(ctx.name, ctx.version);
  const { table, sha256 } = await readTable(ctx, io);
  const calibrateOn = ctx.calibrateOn === undefined ? undefined : await readFeatureCsv(ctx.calibrateOn, table.features.map((f) => f.name));
  if (calibrateOn) io.stderr.write(`read ${calibrateOn.rows} calibration rows from ${ctx.calibrateOn}\n`);
  const counts = table.classes.map((_, k) => table.labels.filter((i) => i === k).length);
  if (ctx.folds > table.rows) throw new UsageError(`--folds ${ctx.folds} needs at least ${ctx.folds} rows; ${ctx.data} has ${table.rows}`);
  table.classes.forEach((c, k) => {
    // Fewer than 10 rows leave one or two per fold: its held-out metrics say little.
    if ((counts[k] as number) < 10) io.stderr.write(`warning: class ${JSON.stringify(c)} has only ${counts[k]} row${counts[k] === 1 ? '' : 's'}; its held-out metrics are unreliable\n`);
  });
  const progress = progressReporter(io);
  let trained: TrainedBundle;
  try {
    const { calibrateOn: _path, ...options } = ctx;
    trained = trainBundle(table, { ...options, ...(calibrateOn ? { calibrateOn } : {}), dataSha256: sha256, labelColumn: ctx.label }, progress.onEpoch);
  } finally {
    progress.stop();
  }
  await writeVerifiedBundle(trained.bundle, ctx.out, io, 'trained');
  return trained;
}
