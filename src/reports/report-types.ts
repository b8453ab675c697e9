/** The drift report (issue contract, plus the bins and verdict the HTML view needs). */
export interface DriftReport {
  id: string;
  model: { name: string; version: string; sha256: string };
  window: { from: string; to: string };
  created_at: string;
  verdict: 'stable' | 'watch' | 'shifted' | 'insufficient data';
  counts: { scored: number; rejected: number; out_of_domain: number; other_versions: number };
  out_of_domain: {
    rate: number | null;
    ci_low: number | null;
    ci_high: number | null;
    /** The bundle's false-alarm rate on its calibration rows, with their count and its Clopper–Pearson interval. */
    expected_rate: number;
    expected_ci_low?: number;
    expected_ci_high?: number;
    expected_rows?: number;
    /** Exact binomial test against the interval's upper end (reports made before it existed: the rate). */
    p_value: number | null;
  };
  features: FeatureDrift[];
  predictions: {
    fractions: Record<string, number>;
    reference_fractions: Record<string, number>;
    chi_square: { statistic: number | null; df: number; p_value: number | null };
    js_distance: number | null;
  };
  margin: { mean: number | null; reference_mean: number; ks: { d: number | null; p_value: number | null }; review_rate: number | null };
  hourly: Array<{ hour: string; scored: number; out_of_domain: number }>;
  sample: { rows: number; cap: number; reservoir: boolean; seed: number };
  findings: string[];
}

export interface FeatureDrift {
  name: string;
  unit: string;
  n: number;
  mean: number | null;
  reference_mean: number;
  psi: number | null;
  band: 'stable' | 'watch' | 'shifted' | null;
  ks: { d: number | null; p_value: number | null; method: 'exact' | 'asymptotic' | null };
  p_adjusted: number | null;
  /** Wasserstein-1 between the window and the reference sample, in training standard deviations. */
  wasserstein: number | null;
  outside_count: number;
  bins: { edges: number[]; reference: number[]; window: number[] };
}
