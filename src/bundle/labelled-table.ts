import type { FeatureInfo } from './schema.js';

/** A labelled data set as training and import read it: features in their units, one class per row. */
export interface LabelledTable {
  features: FeatureInfo[];
  /** rows x features, row-major, in the units of the features. */
  x: Float64Array;
  rows: number;
  /** Class index of each row into `classes`. */
  labels: Int32Array;
  classes: string[];
}
