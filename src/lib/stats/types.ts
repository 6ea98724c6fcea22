/** Keys of the straight-line estimators, as used by the CLI, the API and stored analyses. */
export type MethodKey =
  | 'ols'
  | 'deming'
  | 'weightedDeming'
  | 'passingBablok'
  | 'huber'
  | 'tukey'
  | 'hampel'
  | 'mm'
  | 'lad';

/** How a robust fit was started. */
export type StartKind = 'ols' | 's-estimate' | 'given';

/**
 * A fitted line y = intercept + slope·x (x comparative, y candidate).
 * Fields that do not apply to a method are left out.
 */
export interface LineFit {
  method: MethodKey;
  n: number;
  intercept: number;
  slope: number;
  /** Confidence intervals at `confidence` (default 0.95). */
  interceptCI: [number, number];
  slopeCI: [number, number];
  confidence: number;
  /**
   * Covariance matrix of (intercept, slope) when the method gives one
   * (OLS: classical; Deming: jackknife; M and MM: sandwich). Used for bias CIs at decision levels.
   */
  covariance?: [[number, number], [number, number]];
  /** Degrees of freedom for t-based intervals from `covariance`. */
  df?: number;
  /** Residual scale (robust fits: the final scale estimate; OLS: residual SD). */
  scale?: number;
  iterations?: number;
  converged?: boolean;
  start?: StartKind;
  /** Final robust weight per sample, in input order. */
  weights?: number[];
  /** Hat values of the final weighted step (diagonal of the hat matrix of W^½X), in input order. */
  hat?: number[];
}
