/**
 * Bias of a fitted line y = a + b·x at a medical decision level X_c: B(X_c) = a + (b − 1)·X_c, in measurement
 * units, and 100·B/X_c in percent (STATISTICS.md, "Bias at a medical decision level"). On its own, without the
 * rest of the engine, so that a page can show it without loading the estimators.
 *
 * @example
 * lineBias(2, 1.03, 126); // { bias: 5.78, percentBias: 4.587… }
 */
export function lineBias(intercept: number, slope: number, level: number): { bias: number; percentBias: number } {
  const bias = intercept + (slope - 1) * level;
  return { bias, percentBias: (100 * bias) / level };
}
