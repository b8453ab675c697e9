import type { ImportedGraph } from '../io/onnx/index.js';
import { ECE_BINS, type Evaluation, evaluateHeldOut, heldOutLogits } from './evaluate.js';
import { encodeNetwork } from './network-codec.js';
import { BUNDLE_FORMAT, type BundleFile } from './schema.js';
import { type BundleOptions, type LabelledTable, isoSeconds, servingSections } from './train-bundle.js';
import { sealBundle } from './verify.js';

export interface ImportOptions extends Pick<BundleOptions, 'name' | 'version' | 'createdAt' | 'tolerance' | 'reviewMargin' | 'detectors' | 'inDomainRate' | 'keepWeak' | 'seed' | 'dataSha256' | 'labelColumn'> {
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
  const all = Array.from({ length: table.rows }, (_, r) => r);
  // The imported network never saw --calibrate-on's rows (as far as anyone here can know): they are
  // checked as new vectors are. Without them, the data itself stands in, which flatters the flag.
  const rowsOf = cal ?? table;
  const logits = heldOutLogits(() => [network], preprocess, { x: rowsOf.x, rows: rowsOf.rows, memberOf: new Int32Array(rowsOf.rows) }, K);
  const evaluation = evaluateHeldOut(logits, rowsOf.labels, table.classes, cal !== undefined);

  const bundle = sealBundle({
    format: BUNDLE_FORMAT,
    name: options.name,
    version: options.version,
    created_at: isoSeconds(options.createdAt),
    features: table.features,
    classes: table.classes,
    preprocess,
    members: [encodeNetwork(network)],
    calibration: { temperature: evaluation.temperature, fit: evaluation.fit },
    ...servingSections({
      members: [network],
      preprocess,
      temperature: evaluation.temperature,
      table,
      memberRows: [all],
      calibration: cal
        ? { x: cal.x, rows: cal.rows, memberOf: new Int32Array(cal.rows).fill(-1), source: 'calibrate-on' }
        : { x: table.x, rows: table.rows, memberOf: new Int32Array(table.rows).fill(-1), source: 'training' },
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
      rows: { total: table.rows + (cal?.rows ?? 0), folds: 1, held_out: cal?.rows ?? 0 },
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
        keep_weak: options.keepWeak,
        in_domain_rate: options.inDomainRate,
      },
      calibration_networks: 0,
      members: [],
      metrics: {
        // On the held-out rows when given; else on the data itself, which the network may have been trained on.
        held_out: evaluation.metrics,
        calibration: { temperature: evaluation.temperature, fit: evaluation.fit, bins: ECE_BINS, before: evaluation.before, after: evaluation.after },
      },
    },
  });
  return { bundle, evaluation };
}
