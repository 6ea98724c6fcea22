/**
 * Relative step size ‖G(β) − β‖/‖β‖ below which iterateToFixedPoint (the S refinement's I-steps) accepts accelerated
 * iterates. Far from the solution the plain steps are kept, so that acceleration cannot carry a fit from the basin its
 * start lies in to another fixed point (a redescending ρ can have several); near it the iteration is a contraction
 * and the extrapolation only shortens the way to the same point.
 */
export const ACCELERATE_BELOW = 1e-4;

/**
 * Anderson acceleration of a fixed-point iteration β ← G(β) of depth 2 (Anderson, J ACM 1965; Walker & Ni,
 * SIAM J Numer Anal 2011): from the last three iterates βₖ and their steps fₖ = G(βₖ) − βₖ, the γ minimising
 * ‖fₖ − ΔF·γ‖ gives the next iterate G(βₖ) − ΔG·γ, where ΔF and ΔG hold successive differences of the steps and
 * of the mapped iterates. The fixed point is the one of the plain iteration; linear convergence becomes faster.
 * Callers keep the plain step when an accelerated iterate makes the next step longer, and then call `reset`.
 *
 * @example
 * const acceleration = new AndersonAcceleration(2);
 * const next = acceleration.propose(beta, irlsStep(beta)) ?? irlsStep(beta); // null until there is history
 */
export class AndersonAcceleration {
  // plain arrays: these vectors are short, and typed arrays cost far more to allocate than they save here
  private iterates: number[][] = [];
  private steps: number[][] = [];

  constructor(private readonly p: number) {}

  /** The accelerated iterate after β with G(β) = `mapped`, or null while the history is too short or degenerate. */
  propose(beta: Float64Array, mapped: Float64Array): Float64Array | null {
    const { p } = this;
    const step = new Array<number>(p);
    const iterate = new Array<number>(p);
    for (let j = 0; j < p; j++) {
      step[j] = mapped[j] - beta[j];
      iterate[j] = beta[j];
    }
    this.iterates.push(iterate);
    this.steps.push(step);
    if (this.iterates.length > 3) {
      this.iterates.shift();
      this.steps.shift();
    }
    const depth = this.steps.length - 1;
    if (depth === 0) return null;
    const stepDifferences: number[][] = [];
    const mappedDifferences: number[][] = [];
    for (let k = 0; k < depth; k++) {
      const df = new Array<number>(p);
      const dg = new Array<number>(p);
      for (let j = 0; j < p; j++) {
        df[j] = this.steps[k + 1][j] - this.steps[k][j];
        dg[j] = this.iterates[k + 1][j] - this.iterates[k][j] + df[j]; // ΔG = Δβ + ΔF
      }
      stepDifferences.push(df);
      mappedDifferences.push(dg);
    }
    const gamma = leastSquaresCoefficients(stepDifferences, step);
    if (gamma === null) return null;
    const next = Float64Array.from(mapped);
    for (let k = 0; k < gamma.length; k++) {
      const dg = mappedDifferences[mappedDifferences.length - gamma.length + k];
      for (let j = 0; j < p; j++) next[j] -= gamma[k] * dg[j];
    }
    for (let j = 0; j < p; j++) if (!Number.isFinite(next[j])) return null;
    return next;
  }

  reset(): void {
    this.iterates = [];
    this.steps = [];
  }
}

const dot = (a: number[], b: number[]) => {
  let sum = 0;
  for (let j = 0; j < a.length; j++) sum += a[j] * b[j];
  return sum;
};

/**
 * γ minimising ‖f − Σγₖcₖ‖ over one or two columns cₖ by the normal equations; with two nearly parallel columns only
 * the newest is used; null when even that one is zero.
 */
function leastSquaresCoefficients(columns: number[][], f: number[]): number[] | null {
  const newest = columns[columns.length - 1];
  const nn = dot(newest, newest);
  if (columns.length === 2) {
    const [older] = columns;
    const oo = dot(older, older);
    const on = dot(older, newest);
    const det = oo * nn - on * on;
    if (det > 1e-10 * oo * nn) {
      const of = dot(older, f);
      const nf = dot(newest, f);
      return [(of * nn - nf * on) / det, (oo * nf - on * of) / det];
    }
  }
  return nn > 0 ? [dot(newest, f) / nn] : null;
}

/**
 * Relative change ‖next − previous‖/‖previous‖ of a coefficient vector (the irls.delta of MASS::rlm), over the first
 * `length` entries (all by default): the stopping rule of IRLS and of the S refinement.
 *
 * @example
 * relativeChange(Float64Array.of(1, 2), Float64Array.of(1, 2.002)); // ≈ 8.9e-4
 */
export function relativeChange(previous: Float64Array, next: Float64Array, length = next.length): number {
  let diff = 0;
  let size = 0;
  for (let j = 0; j < length; j++) {
    diff += (next[j] - previous[j]) ** 2;
    size += previous[j] ** 2;
  }
  return Math.sqrt(diff / Math.max(1e-20, size));
}

/** Where a fixed-point iteration stopped: the last mapped iterate G(β), the steps taken and whether the rule was met. */
export interface FixedPointResult {
  beta: Float64Array;
  iterations: number;
  converged: boolean;
}

/**
 * Iterates β ← G(β) from `start` until change(β, G(β)) ≤ tolerance or `maxIterations` evaluations of G, with
 * Anderson acceleration (depth 2) once the change is below ACCELERATE_BELOW unless `accelerate` is false; an
 * accelerated iterate that lengthens the next step is dropped for the plain step. Returns the last G(β), the fit of
 * the last step (Walker & Ni, SIAM J Numer Anal 2011, for the safeguarded scheme). IRLS itself takes Newton updates
 * instead (irlsOnDesign), which its M-step gives at no extra pass.
 *
 * @example
 * iterateToFixedPoint((b) => Float64Array.of(Math.cos(b[0])), (u, v) => Math.abs(v[0] - u[0]), Float64Array.of(1), 1e-12, 100).beta[0]; // 0.739085…
 */
export function iterateToFixedPoint(
  step: (beta: Float64Array) => Float64Array,
  change: (from: Float64Array, to: Float64Array) => number,
  start: Float64Array,
  tolerance: number,
  maxIterations: number,
  accelerate = true,
): FixedPointResult {
  const acceleration = new AndersonAcceleration(start.length);
  let beta = start;
  let mapped = step(beta);
  let size = change(beta, mapped);
  let iterations = 1;
  while (size > tolerance && iterations < maxIterations) {
    const candidate = (accelerate && size <= ACCELERATE_BELOW ? acceleration.propose(beta, mapped) : null) ?? mapped;
    const candidateMapped = step(candidate);
    iterations++;
    const candidateSize = change(candidate, candidateMapped);
    if (candidate !== mapped && candidateSize > size && iterations < maxIterations) {
      // the extrapolation made the step longer: forget it and take the plain step instead
      acceleration.reset();
      beta = mapped;
      mapped = step(beta);
      iterations++;
      size = change(beta, mapped);
    } else {
      beta = candidate;
      mapped = candidateMapped;
      size = candidateSize;
    }
  }
  return { beta: mapped, iterations, converged: size <= tolerance };
}
