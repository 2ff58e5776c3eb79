/**
 * Levenberg–Marquardt for least squares problems that provide their own normal equations.
 *
 * The problem accumulates A = JᵀWJ and g = JᵀW r directly (for the arm, pose by pose into flat
 * buffers, never forming J), so memory and time stay linear in the number of residuals.
 *
 * Method (Moré 1978 scaling, Nielsen 1999 damping update, as described in Madsen, Nielsen & Tingleff,
 * "Methods for non-linear least squares problems", 2004):
 *   - column scaling D_j = max over iterations of sqrt(A_jj) (MINPACK's rule), so mm and rad columns are
 *     comparable; the step solves (D⁻¹AD⁻¹ + λI)·(Dδ) = −D⁻¹g by a Cholesky factorisation, never an
 *     inverse (the flat Float64Array Cholesky of linalg.ts: at p ≈ 30 object-based matrices cost more than the solve;
 *     checked against ml-matrix's CholeskyDecomposition in tests/engine/lm.test.ts);
 *   - gain ratio ρ = actual / predicted reduction; accepted steps scale λ by max(1/3, 1 − (2ρ − 1)³),
 *     rejected ones multiply it by ν (ν doubling);
 *   - stop when the scaled gradient ‖D⁻¹g‖∞ / ‖r‖ ≤ gradientTolerance (MINPACK's gtol: cosine between the
 *     residual and every column), the relative cost reduction ≤ costTolerance, the scaled step
 *     ‖Dδ‖ ≤ stepTolerance·(‖Dx‖ + stepTolerance) (these are "converged"), or — "not converged", with the
 *     reason — no step lowers the cost up to λ = 1e16, the normal equations cannot be factorised (or are
 *     non-finite) at any damping, or maxIterations; and, when
 *     the residual degrees of freedom are given, once the Gauss–Newton step would move no parameter by
 *     more than `significance` (default 1 %) of its standard error;
 *   - without reweighting, a trial point's normal equations come from the same pass as its cost;
 *   - robust losses by iteratively reweighted least squares: the problem's `reweight(x)` recomputes the
 *     weights once per accepted iteration (Holland & Welsch 1977).
 */
import { choleskyInPlace, choleskySolveInPlace } from './linalg';

export interface LeastSquaresProblem {
  /** Number of parameters p. */
  readonly size: number;
  /** Cost ½ Σ w_i r_i² at x. */
  cost(x: Float64Array): number;
  /** Fill A (p×p row-major; only the upper triangle is read) = JᵀWJ and g = JᵀW r at x; return the cost at x. */
  normalEquations(x: Float64Array, A: Float64Array, g: Float64Array): number;
  /** Optional IRLS step: recompute the robust weights at x. */
  reweight?(x: Float64Array): void;
  /**
   * Optional update rule: the point reached from x by the step δ, into `out` (default x + δ). A problem
   * whose parameters include a rotation uses it to apply the step as a small rotation about the current
   * estimate (left-multiplied increment) instead of adding to angles that are singular somewhere.
   */
  retract?(x: Float64Array, step: Float64Array, out: Float64Array): void;
}

export interface LmIteration {
  iteration: number;
  cost: number;
  rmsMm: number;
  lambda: number;
  stepNorm: number;
}

export interface LmOptions {
  /** Maximum outer iterations (each ends with an accepted step). Default 50. */
  maxIterations?: number;
  /** Default 1e-8 (as SciPy's least_squares gtol). */
  gradientTolerance?: number;
  /** Relative cost reduction that counts as no progress. Default 1e-8 (SciPy's ftol). */
  costTolerance?: number;
  /** Relative scaled step. Default 1e-8 (SciPy's xtol). */
  stepTolerance?: number;
  /** Initial λ relative to the unit-diagonal scaled normal matrix. Default 1e-3. */
  initialDamping?: number;
  /** Maps a cost to the RMS shown in progress reports. Default sqrt(2·cost). */
  rmsOf?: (cost: number) => number;
  /** Called with iteration 0 (the start) and after every accepted step. */
  onIteration?: (it: LmIteration) => void;
  /**
   * Residual degrees of freedom m − p. When given, also stop once the next step would move the
   * parameters by less than `significance` standard errors (δᵀAδ ≤ significance²·σ̂²): further digits are
   * below the statistical resolution of the data. Default: not used.
   */
  degreesOfFreedom?: number;
  /** Fraction of a standard error for the statistical stop. Default 0.01. */
  significance?: number;
  /** Normal equations already computed at x0 (saves one pass); ignored when the problem reweights. */
  initial?: { A: Float64Array; g: Float64Array; cost: number };
}

export type LmStop = 'gradient' | 'cost' | 'step' | 'significance' | 'no-decrease' | 'singular' | 'iterations';

export interface LmResult {
  x: Float64Array;
  cost: number;
  iterations: LmIteration[];
  stop: LmStop;
  stopReason: string;
  converged: boolean;
  evaluations: { cost: number; normal: number };
  /** Normal matrix JᵀWJ (p×p; full when the problem fills it, else its upper triangle) and gradient JᵀWr at the returned x. */
  A: Float64Array;
  g: Float64Array;
}

const REASONS: Record<LmStop, string> = {
  gradient: 'converged: the gradient is zero within tolerance (residuals orthogonal to every parameter direction)',
  cost: 'converged: the last step lowered the cost by less than the relative tolerance',
  step: 'converged: the last step was smaller than the relative tolerance',
  significance: 'converged: the next step would change every parameter by less than 1 % of its standard error',
  'no-decrease': 'not converged: no step lowers the cost although the gradient is not zero (damping above 1e16); the model or the data may be inconsistent',
  singular: 'not converged: the normal equations could not be factorised at any damping up to 1e16 (singular or non-finite, e.g. a parameter with no effect or NaN in the data)',
  iterations: 'not converged: the iteration limit was reached before convergence',
};

export function levenbergMarquardt(problem: LeastSquaresProblem, x0: ArrayLike<number>, options: LmOptions = {}): LmResult {
  const maxIterations = options.maxIterations ?? 50;
  const gtol = options.gradientTolerance ?? 1e-8;
  const ftol = options.costTolerance ?? 1e-8;
  const xtol = options.stepTolerance ?? 1e-8;
  const rmsOf = options.rmsOf ?? ((c: number) => Math.sqrt(2 * c));
  const dof = options.degreesOfFreedom ?? 0;
  const significance = options.significance ?? 0.01;
  const p = problem.size;
  const x = Float64Array.from(x0);
  const xn = new Float64Array(p);
  let A = new Float64Array(p * p);
  let g = new Float64Array(p);
  // Without reweighting, a trial point's normal equations are computed in the same pass as its cost:
  // near the solution nearly every step is accepted, so this saves one pass over the data per iteration.
  const fused = !problem.reweight;
  let At = fused ? new Float64Array(p * p) : A;
  let gt = fused ? new Float64Array(p) : g;
  const D = new Float64Array(p);
  const M = new Float64Array(p * p);
  const b = new Float64Array(p);
  const ds = new Float64Array(p);
  const step = new Float64Array(p);
  const retract = problem.retract?.bind(problem);
  const evaluations = { cost: 0, normal: 0 };
  const iterations: LmIteration[] = [];
  const report = (it: LmIteration) => {
    iterations.push(it);
    options.onIteration?.(it);
  };

  let cost: number;
  if (options.initial && !problem.reweight) {
    A.set(options.initial.A);
    g.set(options.initial.g);
    cost = options.initial.cost;
  } else {
    problem.reweight?.(x);
    cost = problem.normalEquations(x, A, g);
    evaluations.normal++;
  }
  let lambda = options.initialDamping ?? 1e-3;
  let nu = 2;
  report({ iteration: 0, cost, rmsMm: rmsOf(cost), lambda, stepNorm: 0 });
  let stop: LmStop = 'iterations';

  outer: for (let iter = 1; iter <= maxIterations; iter++) {
    for (let i = 0; i < p; i++) {
      const dj = Math.sqrt(Math.max(A[i * p + i], 0));
      if (dj > D[i]) D[i] = dj;
    }
    // Non-finite normal equations (NaN in the data or the model) would pass the gradient test below
    // vacuously: they end the solve as singular, never as converged.
    let finite = Number.isFinite(cost);
    for (let i = 0; i < p && finite; i++) finite = Number.isFinite(g[i]) && Number.isFinite(A[i * p + i]);
    if (!finite) { stop = 'singular'; break; }
    let gmax = 0;
    const rnorm = Math.sqrt(2 * cost);
    for (let i = 0; i < p; i++) if (D[i] > 0) gmax = Math.max(gmax, Math.abs(g[i]) / D[i]);
    if (rnorm === 0 || gmax <= gtol * rnorm) {
      stop = 'gradient';
      break;
    }
    // Statistical stop: the Gauss–Newton step's size in the metric of the parameter covariance,
    // δᵀAδ = g̃ᵀÃ⁻¹g̃ (Ã = D⁻¹AD⁻¹, g̃ = D⁻¹g), against σ̂² = 2·cost / dof. By Cauchy–Schwarz in that
    // metric, |δ_j| ≤ √(δᵀAδ / σ̂²)·SE_j, so below significance² no parameter would move by more than
    // that fraction of its standard error and the step is not worth a pass over the data.
    if (dof > 0) {
      for (let i = 0; i < p; i++) {
        const di = D[i] > 0 ? D[i] : 1;
        for (let j = 0; j <= i; j++) M[i * p + j] = A[j * p + i] / (di * (D[j] > 0 ? D[j] : 1));
        b[i] = -g[i] / di;
      }
      if (choleskyInPlace(M, p)) {
        ds.set(b);
        choleskySolveInPlace(M, p, ds);
        let gn2 = 0;
        for (let i = 0; i < p; i++) gn2 += b[i] * ds[i];
        if (gn2 <= significance * significance * ((2 * cost) / dof)) { stop = 'significance'; break; }
      }
    }
    // Inner loop: raise λ until a step lowers the cost.
    for (;;) {
      for (let i = 0; i < p; i++) {
        const di = D[i] > 0 ? D[i] : 1;
        for (let j = 0; j <= i; j++) {
          const dj = D[j] > 0 ? D[j] : 1;
          M[i * p + j] = A[j * p + i] / (di * dj);
        }
        M[i * p + i] += lambda;
        b[i] = -g[i] / di;
      }
      if (!choleskyInPlace(M, p)) {
        lambda *= nu;
        nu *= 2;
        // A factorisation that fails at every damping is a singular (or non-finite) problem, never a solution.
        if (lambda > 1e16) { stop = 'singular'; break outer; }
        continue;
      }
      ds.set(b);
      choleskySolveInPlace(M, p, ds);
      let stepScaled2 = 0, xScaled2 = 0, predicted = 0;
      for (let i = 0; i < p; i++) {
        const di = D[i] > 0 ? D[i] : 1;
        const s = ds[i];
        step[i] = s / di;
        xn[i] = x[i] + step[i];
        stepScaled2 += s * s;
        xScaled2 += (di * x[i]) ** 2;
        predicted += b[i] * s + lambda * s * s;
      }
      predicted *= 0.5;
      if (retract) retract(x, step, xn);
      const stepNorm = Math.sqrt(stepScaled2);
      let costN: number;
      if (fused) {
        costN = problem.normalEquations(xn, At, gt);
        evaluations.normal++;
      } else {
        costN = problem.cost(xn);
        evaluations.cost++;
      }
      const rho = predicted > 0 ? (cost - costN) / predicted : -1;
      if (rho > 0 && costN < cost) {
        lambda *= Math.max(1 / 3, 1 - (2 * rho - 1) ** 3);
        nu = 2;
        const reduction = cost - costN;
        const costBefore = cost;
        x.set(xn);
        if (fused) {
          [A, At] = [At, A];
          [g, gt] = [gt, g];
          cost = costN;
        } else {
          problem.reweight?.(x);
          cost = problem.normalEquations(x, A, g);
          evaluations.normal++;
        }
        report({ iteration: iter, cost, rmsMm: rmsOf(cost), lambda, stepNorm });
        if (reduction <= ftol * costBefore) { stop = 'cost'; break outer; }
        if (stepNorm <= xtol * (Math.sqrt(xScaled2) + xtol)) { stop = 'step'; break outer; }
        break;
      }
      lambda *= nu;
      nu *= 2;
      // A rejected step below the step tolerance is MINPACK's xtol end (converged); running out of damping
      // without any decrease is not.
      if (stepNorm <= xtol * (Math.sqrt(xScaled2) + xtol)) { stop = 'step'; break outer; }
      if (lambda > 1e16) { stop = 'no-decrease'; break outer; }
    }
  }
  const stopReason = stop === 'significance'
    ? `converged: the next step would change every parameter by less than ${+(significance * 100).toPrecision(3)} % of its standard error`
    : REASONS[stop];
  return { x, cost, iterations, stop, stopReason, converged: stop !== 'iterations' && stop !== 'no-decrease' && stop !== 'singular', evaluations, A, g };
}

/** IRLS weight of a residual of size e for a robust loss with scale k (Huber 1964; Cauchy / Lorentzian). */
export function robustWeight(kind: 'none' | 'huber' | 'cauchy', e: number, k: number): number {
  if (kind === 'huber') return e <= k ? 1 : k / e;
  if (kind === 'cauchy') return 1 / (1 + (e / k) ** 2);
  return 1;
}

/**
 * Second derivative ρ''(e) of the robust loss of a 3-D error e (its first derivative is e · robustWeight):
 * Huber ρ = e²/2 (e ≤ k), k·e − k²/2 (e > k) → ρ'' = 1 or 0; Cauchy ρ = (k²/2)·ln(1 + (e/k)²) →
 * ρ'' = (1 − s²)/(1 + s²)², s = e/k; none ρ = e²/2 → 1.
 */
export function robustCurvature(kind: 'none' | 'huber' | 'cauchy', e: number, k: number): number {
  if (kind === 'huber') return e <= k ? 1 : 0;
  if (kind === 'cauchy') {
    const s2 = (e / k) ** 2;
    return (1 - s2) / ((1 + s2) * (1 + s2));
  }
  return 1;
}

/**
 * Adapter for small dense problems (tests, curve fits): residuals r(x) (length m) and Jacobian J(x)
 * (m×p row-major), optional per-residual weights.
 */
export function denseProblem(
  size: number,
  residuals: (x: Float64Array) => ArrayLike<number>,
  jacobian: (x: Float64Array) => ArrayLike<number>,
  weights?: ArrayLike<number>,
): LeastSquaresProblem {
  const cost = (x: Float64Array) => {
    const r = residuals(x);
    let c = 0;
    for (let i = 0; i < r.length; i++) c += (weights ? weights[i] : 1) * r[i] * r[i];
    return 0.5 * c;
  };
  return {
    size,
    cost,
    normalEquations(x, A, g) {
      const r = residuals(x);
      const J = jacobian(x);
      A.fill(0);
      g.fill(0);
      let c = 0;
      for (let i = 0; i < r.length; i++) {
        const w = weights ? weights[i] : 1;
        c += w * r[i] * r[i];
        for (let a = 0; a < size; a++) {
          const ja = w * J[i * size + a];
          g[a] += ja * r[i];
          for (let bb = a; bb < size; bb++) A[a * size + bb] += ja * J[i * size + bb];
        }
      }
      return 0.5 * c;
    },
  };
}
