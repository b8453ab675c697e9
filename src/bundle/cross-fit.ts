import { type Network, roundToFloat32 } from '../core/network.js';
import { createRng, deriveSeed } from '../core/rng.js';
import { rowsOfFold, stratifiedFolds, stratifiedSplit, take, takeRows } from '../core/split.js';
import { type Standardizer, fitStandardizer, standardize } from '../core/standardize.js';
import { type EpochReport, type TrainOptions, type TrainResult, classWeightsFor, trainClassifier } from '../core/train.js';
import type { LabelledTable } from './labelled-table.js';

export interface CrossFitOptions extends TrainOptions {
  /** K: 1 trains one network beside a hold-out; 2 or more trains one network per fold. */
  folds: number;
  /** Share of each network's rows its early stopping watches (the hold-out itself when K = 1). */
  validationFraction: number;
  balance: boolean;
}

export interface FittedMember {
  /** Rounded to float32, as the bundle stores it: what is evaluated is what is served. */
  network: Network;
  /** Rows of the table the network was fitted on, its early-stopping rows included. */
  trainRows: number[];
  earlyStoppingRows: number[];
  result: TrainResult;
}

export interface CrossFit {
  members: FittedMember[];
  /**
   * With K >= 3, one network per pair of folds {a, b}, trained without both: the K - 1 of them
   * that never saw fold a's rows answer those rows together, as the members answer a new row, so
   * that the ensemble's temperature, its disagreement and its metrics are measured out of fold.
   * They are not served.
   */
  calibrationNets: Array<{ network: Network; without: [number, number] }>;
  preprocess: Standardizer;
  /**
   * Per row of the table, the member that never saw it (its fold's network, or the single
   * network for a hold-out row), or -1 where every member trained on it.
   */
  heldOutBy: Int32Array;
}

/** Progress of one network's training, for the terminal: network `member` of `members` in all. */
export interface MemberEpochReport extends EpochReport {
  member: number;
  members: number;
}

/**
 * For the rows of one fold, the networks that never saw them and answer them together: the K - 1
 * calibration networks trained without that fold, or with K <= 2 the fold's own member alone.
 */
export function heldOutEnsemble(fit: CrossFit, fold: number): Network[] {
  const nets = fit.calibrationNets.filter((c) => c.without.includes(fold)).map((c) => c.network);
  return nets.length > 0 ? nets : [(fit.members[fold] as FittedMember).network];
}

/**
 * Cross-fitting: with K >= 2 the rows are split into K stratified folds and member m is trained
 * on every fold but m, its early stopping watching an inner stratified split of those rows, never
 * fold m; so every row gets a prediction from a network that never saw it. With K >= 3 the
 * calibration networks (one per pair of folds) give every row an ensemble answer from networks
 * that never saw it too: K + K(K - 1)/2 networks are trained, K are served. With K = 1 one
 * network trains beside a stratified hold-out (the validation split), which then plays the part
 * of the folds. The standardisation is fitted on the rows the networks train on (all rows when
 * K >= 2: a mean and a scale per feature, shared by the members).
 */
export function crossFit(table: LabelledTable, options: CrossFitOptions, onEpoch?: (r: MemberEpochReport) => void): CrossFit {
  const { x, labels, rows } = table;
  const d = table.features.length;
  const classes = table.classes.length;
  const heldOutBy = new Int32Array(rows).fill(-1);
  const fit = (member: number, members: number, trainRows: number[], earlyStoppingRows: number[], preprocess: Standardizer, seed: number): FittedMember => {
    const trainY = take(labels, trainRows);
    const stopY = take(labels, earlyStoppingRows);
    const result = trainClassifier(
      { x: standardize(preprocess, takeRows(x, d, trainRows), trainRows.length), labels: trainY, rows: trainRows.length },
      stopY.length > 0 ? { x: standardize(preprocess, takeRows(x, d, earlyStoppingRows), stopY.length), labels: stopY, rows: stopY.length } : null,
      classes,
      classWeightsFor(trainY, classes, options.balance),
      { ...options, seed },
      onEpoch ? (r) => onEpoch({ ...r, member, members }) : undefined,
    );
    return { network: roundToFloat32(result.network), trainRows: [...trainRows, ...earlyStoppingRows].sort((a, b) => a - b), earlyStoppingRows, result };
  };

  if (options.folds <= 1) {
    const split = stratifiedSplit(labels, classes, options.validationFraction, createRng(deriveSeed(options.seed, 1)));
    const preprocess = fitStandardizer(takeRows(x, d, split.train), split.train.length, d);
    for (const r of split.validation) heldOutBy[r] = 0;
    const member = fit(0, 1, split.train, split.validation, preprocess, options.seed);
    // The hold-out watched early stopping, but no gradient step saw it; the network's own rows are the training split.
    member.trainRows = split.train;
    return { members: [member], calibrationNets: [], preprocess, heldOutBy };
  }

  const fold = stratifiedFolds(labels, classes, options.folds, createRng(deriveSeed(options.seed, 1)));
  fold.forEach((f, r) => (heldOutBy[r] = f));
  const preprocess = fitStandardizer(x, rows, d);
  const pairs: Array<[number, number]> = [];
  if (options.folds >= 3) for (let a = 0; a < options.folds; a++) for (let b = a + 1; b < options.folds; b++) pairs.push([a, b]);
  const total = options.folds + pairs.length;
  // Each network watches an inner stratified split of its own rows for early stopping.
  const train = (index: number, own: number[], stream: number): FittedMember => {
    const inner = stratifiedSplit(take(labels, own), classes, options.validationFraction, createRng(deriveSeed(options.seed, 100 + stream)));
    return fit(index, total, inner.train.map((i) => own[i] as number), inner.validation.map((i) => own[i] as number), preprocess, deriveSeed(options.seed, 200 + stream));
  };
  const members = Array.from({ length: options.folds }, (_, m) => train(m, rowsOfFold(fold, m, true), m));
  const calibrationNets = pairs.map(([a, b], i) => {
    const own = Array.from(fold.keys()).filter((r) => fold[r] !== a && fold[r] !== b);
    return { network: train(options.folds + i, own, 1000 + a * 32 + b).network, without: [a, b] as [number, number] };
  });
  return { members, calibrationNets, preprocess, heldOutBy };
}
