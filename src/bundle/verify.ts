import { readFile } from 'node:fs/promises';
import type { Network } from '../core/network.js';
import { canonicalJson, sha256Hex } from './canonical-json.js';
import { triangleSide } from './domain-codec.js';
import { decodeNetwork } from './network-codec.js';
import { type AnyBundleFile, BUNDLE_FORMATS, BUNDLE_FORMAT_V1, type BundleBody, type BundleFile, type LayerJson, REFERENCE_QUANTILE_LEVELS, bundleSchema, bundleV1Schema } from './schema.js';

export interface BundleProblem {
  /** JSON path of the field, e.g. network.layers[1].weights; empty for the file as a whole. */
  path: string;
  message: string;
}

export class BundleError extends Error {
  constructor(
    readonly file: string,
    readonly problems: BundleProblem[],
  ) {
    const shown = problems.slice(0, 5).map((p) => (p.path ? `${p.path}: ${p.message}` : p.message));
    const more = problems.length > 5 ? `; and ${problems.length - 5} more` : '';
    super(`bundle ${file} refused: ${shown.join('; ')}${more}`);
    this.name = 'BundleError';
  }
}

export interface LoadedBundle {
  /** As read: version 1 or 2 (docs/bundle-format.md). */
  file: AnyBundleFile;
  /** The networks that answer together; version 1 has one. */
  members: Network[];
  /** Where it was read from, for messages. */
  source: string;
}

/** The member networks' layers as stored, whichever the version. */
export function storedMembers(file: AnyBundleFile): Array<{ layers: LayerJson[] }> {
  return file.format === BUNDLE_FORMAT_V1 ? [file.network] : file.members;
}

export function bundleSha256(body: BundleBody): string {
  return sha256Hex(canonicalJson(body));
}

/** The file's `sha256` is the hash of the canonical JSON of everything else (RFC 8785 form). */
export function sealBundle(body: BundleBody): BundleFile {
  return { ...body, sha256: bundleSha256(body) };
}

function formatPath(path: ReadonlyArray<PropertyKey>): string {
  return path.reduce<string>((acc, key) => (typeof key === 'number' ? `${acc}[${key}]` : acc ? `${acc}.${String(key)}` : String(key)), '');
}

/** Parses, validates and verifies a bundle; throws BundleError naming the file and every bad field. */
export function parseBundle(text: string, source: string): LoadedBundle {
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (err) {
    // The parser's message quotes the text it stopped at: a file that is not a bundle (a link to
    // /etc/passwd) would have its first line put into a message and a log. Its position only.
    const at = /at position (\d+)/.exec((err as Error).message)?.[1];
    throw new BundleError(source, [{ path: '', message: `is not JSON${at !== undefined ? ` (the parser stopped at character ${at})` : ''}` }]);
  }
  const format = typeof json === 'object' && json !== null && 'format' in json ? (json as { format: unknown }).format : undefined;
  if (format !== undefined && !(BUNDLE_FORMATS as readonly unknown[]).includes(format)) {
    // Quoted only when it looks like a format name, not whatever a file put there.
    const shown = typeof format === 'string' && /^plumbline-bundle\/[A-Za-z0-9.-]{1,16}$/.test(format) ? `is ${JSON.stringify(format)}` : 'is not a bundle format this reader takes';
    throw new BundleError(source, [{ path: 'format', message: `${shown}; this reader takes ${BUNDLE_FORMATS.map((f) => JSON.stringify(f)).join(' or ')}` }]);
  }
  const parsed = format === BUNDLE_FORMAT_V1 ? bundleV1Schema.safeParse(json) : bundleSchema.safeParse(json);
  if (!parsed.success) {
    throw new BundleError(
      source,
      parsed.error.issues.map((i) => ({ path: formatPath(i.path), message: i.message })),
    );
  }
  const file: AnyBundleFile = parsed.data;
  // Hash what the file holds, not what the schema kept, so that nothing can be slipped in.
  const { sha256, ...raw } = json as Record<string, unknown>;
  const actual = sha256Hex(canonicalJson(raw));
  if (actual !== sha256) {
    throw new BundleError(source, [{ path: 'sha256', message: `is ${sha256} but the content hashes to ${actual}; the file was changed after it was written` }]);
  }
  const problems = checkConsistency(file);
  const members: Network[] = [];
  storedMembers(file).forEach((m, i) => {
    try {
      members.push(decodeNetwork(m, file.format === BUNDLE_FORMAT_V1 ? 'network' : `members[${i}]`));
    } catch (err) {
      const message = (err as Error).message;
      const space = message.indexOf(' ');
      problems.push({ path: message.slice(0, space), message: message.slice(space + 1) });
    }
  });
  if (problems.length > 0) throw new BundleError(source, problems);
  return { file, members, source };
}

export async function readBundle(path: string): Promise<LoadedBundle> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (err) {
    throw new BundleError(path, [{ path: '', message: `cannot be read (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})` }]);
  }
  return parseBundle(text, path);
}

/** Checks that the parts of a schema-valid bundle agree with each other: shapes, names, lengths. */
export function checkConsistency(b: AnyBundleFile): BundleProblem[] {
  const problems: BundleProblem[] = [];
  const add = (path: string, message: string): void => void problems.push({ path, message });
  const d = b.features.length;
  const K = b.classes.length;
  const names = b.features.map((f) => f.name);

  const dupFeature = names.find((n, i) => names.indexOf(n) !== i);
  if (dupFeature !== undefined) add('features', `name ${JSON.stringify(dupFeature)} appears more than once`);
  const dupClass = b.classes.find((c, i) => b.classes.indexOf(c) !== i);
  if (dupClass !== undefined) add('classes', `${JSON.stringify(dupClass)} appears more than once`);

  const nets = storedMembers(b);
  const at = (m: number): string => (b.format === BUNDLE_FORMAT_V1 ? 'network' : `members[${m}]`);
  // Width of each member's last hidden layer (0 without one): the feature-space detector's dimension.
  const widths = nets.map((net, m) => {
    const layers = net.layers;
    const first = layers[0];
    const last = layers[layers.length - 1];
    if (first && first.inputs !== d) add(`${at(m)}.layers[0].inputs`, `is ${first.inputs} but the bundle lists ${d} features`);
    if (last && last.outputs !== K) add(`${at(m)}.layers[${layers.length - 1}].outputs`, `is ${last.outputs} but the bundle lists ${K} classes`);
    if (last && last.activation !== 'identity') add(`${at(m)}.layers[${layers.length - 1}].activation`, `is ${last.activation}; the last layer must be identity (it gives the logits)`);
    layers.forEach((l, i) => {
      const next = layers[i + 1];
      if (next && next.inputs !== l.outputs) add(`${at(m)}.layers[${i + 1}].inputs`, `is ${next.inputs} but layer ${i} gives ${l.outputs} outputs`);
    });
    return layers.length >= 2 && last ? last.inputs : 0;
  });

  const sameLength = (path: string, arr: readonly unknown[], n: number, what: string): void => {
    if (arr.length !== n) add(path, `holds ${arr.length} values, expected ${n} (${what})`);
  };
  sameLength('preprocess.mean', b.preprocess.mean, d, 'one per feature');
  sameLength('preprocess.scale', b.preprocess.scale, d, 'one per feature');
  sameLength('domain.envelope.low', b.domain.envelope.low, d, 'one per feature');
  sameLength('domain.envelope.high', b.domain.envelope.high, d, 'one per feature');
  b.domain.envelope.low.forEach((lo, j) => {
    const hi = b.domain.envelope.high[j];
    if (hi !== undefined && lo > hi) add(`domain.envelope.low[${j}]`, `is ${lo}, above its high ${hi}`);
  });
  if ('range' in b.domain.envelope) {
    const { range, low, high } = b.domain.envelope;
    sameLength('domain.envelope.range.low', range.low, d, 'one per feature');
    sameLength('domain.envelope.range.high', range.high, d, 'one per feature');
    // The envelope widens the training range: the range lies inside it.
    range.low.forEach((lo, j) => {
      const hi = range.high[j];
      if (hi !== undefined && lo > hi) add(`domain.envelope.range.low[${j}]`, `is ${lo}, above its high ${hi}`);
      if (low[j] !== undefined && lo < (low[j] as number)) add(`domain.envelope.range.low[${j}]`, `is ${lo}, below the envelope's low ${low[j]}`);
      if (hi !== undefined && high[j] !== undefined && hi > (high[j] as number)) add(`domain.envelope.range.high[${j}]`, `is ${hi}, above the envelope's high ${high[j]}`);
    });
  }

  // The Gaussians of the distance detectors, each at its path: (path, mean length, factor side).
  const gaussians: Array<{ path: string; cholesky: readonly number[]; side: number }> = [];
  const input = (path: string, g: { mean: number[]; cholesky: number[] }): void => {
    sameLength(`${path}.mean`, g.mean, d, 'one per feature');
    sameLength(`${path}.cholesky`, g.cholesky, (d * (d + 1)) / 2, 'the lower triangle of a features x features factor');
    gaussians.push({ path: `${path}.cholesky`, cholesky: g.cholesky, side: d });
  };
  const feature = (path: string, g: { class_means: number[][]; cholesky: number[] }, width: number): void => {
    if (width === 0) add(path, 'needs a hidden layer, and the network has none');
    sameLength(`${path}.class_means`, g.class_means, K, 'one per class');
    g.class_means.forEach((mu, k) => sameLength(`${path}.class_means[${k}]`, mu, width, 'one per unit of the last hidden layer'));
    sameLength(`${path}.cholesky`, g.cholesky, (width * (width + 1)) / 2, 'the lower triangle of a width x width factor');
    gaussians.push({ path: `${path}.cholesky`, cholesky: g.cholesky, side: width });
  };
  if (b.format === BUNDLE_FORMAT_V1) {
    if (b.domain.input_mahalanobis) input('domain.input_mahalanobis', b.domain.input_mahalanobis);
    if (b.domain.feature_mahalanobis) feature('domain.feature_mahalanobis', b.domain.feature_mahalanobis, widths[0] ?? 0);
  } else {
    const dom = b.domain;
    if (dom.input_mahalanobis) {
      sameLength('domain.input_mahalanobis.members', dom.input_mahalanobis.members, nets.length, 'one per member');
      dom.input_mahalanobis.members.forEach((g, m) => input(`domain.input_mahalanobis.members[${m}]`, g));
    }
    if (dom.feature_mahalanobis) {
      sameLength('domain.feature_mahalanobis.members', dom.feature_mahalanobis.members, nets.length, 'one per member');
      dom.feature_mahalanobis.members.forEach((g, m) => feature(`domain.feature_mahalanobis.members[${m}]`, g, widths[m] ?? 0));
    }
    if (dom.disagreement && nets.length < 2) add('domain.disagreement', 'needs two members or more');
  }
  for (const g of gaussians) {
    if (triangleSide(g.cholesky.length) !== g.side) continue;
    for (let i = 0; i < g.side; i++) {
      const diag = g.cholesky[(i * (i + 1)) / 2 + i] as number;
      if (!(diag > 0)) add(g.path, `diagonal element ${i} is ${diag}; a Cholesky factor needs positive ones`);
    }
  }

  const ref = b.reference;
  if (canonicalJson(ref.quantile_levels) !== canonicalJson(REFERENCE_QUANTILE_LEVELS)) add('reference.quantile_levels', `must be ${REFERENCE_QUANTILE_LEVELS.join(', ')}`);
  sameLength('reference.features', ref.features, d, 'one per feature');
  ref.features.forEach((f, j) => {
    const at = `reference.features[${j}]`;
    if (f.name !== names[j]) add(`${at}.name`, `is ${JSON.stringify(f.name)} but feature ${j} is ${JSON.stringify(names[j])}`);
    if (f.min > f.max) add(`${at}.min`, `is ${f.min}, above max ${f.max}`);
    if (f.quantiles.some((q, i) => i > 0 && q < (f.quantiles[i - 1] as number))) add(`${at}.quantiles`, 'must not decrease');
    sameLength(`${at}.quantiles`, f.quantiles, ref.quantile_levels.length, 'one per quantile level');
    sameLength(`${at}.bin_fractions`, f.bin_fractions, f.bin_edges.length + 1, 'one more than the bin edges');
    if (f.bin_edges.some((e, i) => i > 0 && e <= (f.bin_edges[i - 1] as number))) add(`${at}.bin_edges`, 'must be strictly increasing');
  });
  sameLength('reference.sample.values', ref.sample.values, d, 'one column per feature');
  ref.sample.values.forEach((col, j) => sameLength(`reference.sample.values[${j}]`, col, ref.sample.rows, 'one per sample row'));

  const sameKeys = (path: string, rec: Record<string, unknown>): void => {
    const keys = Object.keys(rec);
    if (keys.length !== K || b.classes.some((c) => !Object.hasOwn(rec, c))) add(path, `must have exactly the classes as keys (${b.classes.join(', ')})`);
  };
  sameKeys('reference.class_prior', ref.class_prior);
  sameLength('reference.validation.margins', ref.validation.margins, ref.validation.rows, 'one per validation row');
  sameKeys('reference.validation.predicted_fractions', ref.validation.predicted_fractions);
  const v = b.format === BUNDLE_FORMAT_V1 ? b.training.metrics.validation : b.training.metrics.held_out;
  const metricsAt = b.format === BUNDLE_FORMAT_V1 ? 'training.metrics.validation' : 'training.metrics.held_out';
  if (v) {
    sameKeys(`${metricsAt}.per_class`, v.per_class);
    if (v.confusion.length !== K || v.confusion.some((row) => row.length !== K)) add(`${metricsAt}.confusion`, `must be ${K} x ${K}`);
  }
  return problems;
}
