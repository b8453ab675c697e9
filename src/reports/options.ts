/** How a drift report is built. */
export interface ReportOptions {
  /** Below this many scored rows the report gives counts, not tests. */
  minRows: number;
  /** Rows kept (a seeded uniform reservoir above it) for the KS and Wasserstein comparisons. */
  sampleCap: number;
  seed: number;
}

export const REPORT_DEFAULTS: ReportOptions = { minRows: 30, sampleCap: 10_000, seed: 1 };
