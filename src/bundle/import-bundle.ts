import { meanNll } from '../core/calibration.js';
import { forward } from '../core/network.js';
import { standardize } from '../core/standardize.js';
import type { ImportedGraph } from '../io/onnx/index.js';
import { ECE_BINS, type Evaluation, evaluateHeldOut } from './evaluate.js';
import { encodeNetwork } from './network-codec.js';
import { BUNDLE_FORMAT, type BundleFile } from './schema.js';
import { type BundleOptions, type LabelledTable, isoSeconds, servingSections } from './train-bundle.js';
import { sealBundle } from './verify.js';

export interface ImportOptions extends Pick<BundleOptions, 'name' | 'version' | 'createdAt' | 'tolerance' | 'reviewMargin' | 'detectors' | 'inDomainRate' | 'seed' | 'dataSha256' | 'labelColumn'> {
  /** Labelled held-out rows (raw units): the temperature is fitted and the flag calibrated on them. */
  calibrateOn?: { x: Float64Array; rows: number; labels: Int32Array };
  onnxFile: string;
  /** Whether the graph was fed through --preprocess, for the record. */
  preprocessGiven: boolean;
}

export class ImportMismatchError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ImportMismatchError';
  }
}

/**
 * Seals a bundle around a network trained elsewhere: the data gives the reference statistics,
 * the envelope and the detectors, as for a network trained here. The temperature stays 1 unless
 * labelled held-out rows are given; the flag is calibrated on those, or else on the data itself.
 */
export function importBundle(table: LabelledTable, graph: ImportedGraph, options: ImportOptions): { bundle: BundleFile; evaluation: Evaluation } {
  const { network, preprocess } = graph;
  const d = table.features.length;
  const K = table.classes.length;
  const first = network.layers[0];
  const last = network.layers[network.layers.length - 1];
  if (!first || !last) throw new ImportMismatchError('the graph has no layers');
  if (first.inputs !== d) throw new ImportMismatchError(`the graph takes ${first.inputs} features a row, but ${d} are named (${table.features.map((f) => f.name).join(', ')})`);
  if (last.outputs !== K) throw new ImportMismatchError(`the graph gives ${last.outputs} class scores, but ${K} classes are named (${table.classes.join(', ')})`);

  const cal = options.calibrateOn;
  const evaluation = cal ? evaluateHeldOut(network, preprocess, cal.x, cal.labels, table.classes, true) : evaluateHeldOut(network, preprocess, table.x, table.labels, table.classes, false);
  const nll = (x: Float64Array, rows: number, labels: Int32Array): number => meanNll(forward(network, standardize(preprocess, x, rows), rows).logits, rows, K, labels, 1);

  const bundle = sealBundle({
    format: BUNDLE_FORMAT,
    name: options.name,
    version: options.version,
    created_at: isoSeconds(options.createdAt),
    features: table.features,
    classes: table.classes,
    preprocess,
    network: encodeNetwork(network),
    calibration: { temperature: evaluation.temperature },
    ...servingSections({
      network,
      preprocess,
      temperature: evaluation.temperature,
      table,
      domainTrain: { x: table.x, labels: table.labels, rows: table.rows },
      heldOut: cal ? { x: cal.x, rows: cal.rows, source: 'calibrate-on' } : { x: table.x, rows: table.rows, source: 'training' },
      validation: { predicted: evaluation.predicted, margins: evaluation.margins },
      options,
    }),
    training: {
      source: {
        kind: 'onnx',
        onnx_sha256: graph.sha256,
        onnx_file: options.onnxFile,
        producer: graph.producer,
        opset: graph.opset,
        data_sha256: options.dataSha256,
        label_column: options.labelColumn,
      },
      rows: { total: table.rows + (cal?.rows ?? 0), train: table.rows, validation: cal?.rows ?? 0 },
      seed: options.seed,
      options: {
        imported_from: 'onnx',
        onnx_ops: graph.ops,
        onnx_input_type: graph.inputType,
        onnx_ending: graph.ending,
        preprocess: options.preprocessGiven ? (graph.standardisesItself ? 'given, and in graph' : 'given') : graph.standardisesItself ? 'in graph' : 'none',
        envelope_tolerance: options.tolerance,
        review_margin: options.reviewMargin,
        detectors: [...options.detectors],
        in_domain_rate: options.inDomainRate,
      },
      epochs_run: 0,
      best_epoch: 0,
      stopped_early: false,
      metrics: {
        train_loss: nll(table.x, table.rows, table.labels),
        validation_loss: cal ? nll(cal.x, cal.rows, cal.labels) : null,
        // On the held-out rows when given; else on the data itself, which the network may have been trained on.
        validation: evaluation.metrics,
        calibration: { temperature: evaluation.temperature, bins: ECE_BINS, ece_before: evaluation.eceBefore, ece_after: evaluation.eceAfter },
      },
    },
  });
  return { bundle, evaluation };
}
