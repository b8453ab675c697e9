import { column, meanAndStd } from './describe.js';

export interface Standardizer {
  mean: number[];
  scale: number[];
}

/**
 * Mean and population standard deviation per column; a constant column gets scale 1 so that
 * (x - mean) / scale stays finite (the convention of scikit-learn's StandardScaler).
 */
export function fitStandardizer(x: Float64Array, rows: number, cols: number): Standardizer {
  const mean: number[] = [];
  const scale: number[] = [];
  for (let j = 0; j < cols; j++) {
    const s = meanAndStd(column(x, rows, cols, j));
    mean.push(s.mean);
    scale.push(s.std > 0 && Number.isFinite(s.std) ? s.std : 1);
  }
  return { mean, scale };
}

export function standardizeInto(st: Standardizer, x: Float64Array, rows: number, out: Float64Array): void {
  const cols = st.mean.length;
  for (let r = 0; r < rows; r++) {
    const off = r * cols;
    for (let j = 0; j < cols; j++) out[off + j] = ((x[off + j] as number) - (st.mean[j] as number)) / (st.scale[j] as number);
  }
}

export function standardize(st: Standardizer, x: Float64Array, rows: number): Float64Array {
  const out = new Float64Array(x.length);
  standardizeInto(st, x, rows, out);
  return out;
}
