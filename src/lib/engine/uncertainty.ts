/**
 * Uncertainty of the identified parameters from the final normal matrix and the residual variance
 * (linearised least squares, e.g. Seber & Wild, "Nonlinear Regression", 1989, ch. 2):
 *   σ² = SSR / (m − p) with m residual coordinates and p identified parameters,
 *   Cov = σ² (JᵀWJ)⁻¹, standard error = √Cov_jj, correlation r_ij = Cov_ij / √(Cov_ii Cov_jj).
 * (JᵀWJ)⁻¹ is formed column by column from its Cholesky factor, the one place where the inverse itself
 * is the wanted result.
 */
import { choleskyInPlace, choleskySolveInPlace } from './lm';

export const HIGH_CORRELATION = 0.95;

export interface Uncertainty {
  sigma: number;
  /** Covariance p×p row-major, internal units (mm, rad); null when the normal matrix is singular. */
  covariance: Float64Array | null;
  standardErrors: (number | null)[];
  correlation: number[][];
  high: { a: number; b: number; r: number }[];
}

export function uncertainty(A: Float64Array, p: number, ssr: number, residualCount: number): Uncertainty {
  const dof = residualCount - p;
  const sigma = dof > 0 ? Math.sqrt(ssr / dof) : NaN;
  if (p === 0) return { sigma, covariance: null, standardErrors: [], correlation: [], high: [] };
  // Factor the unit-diagonal scaled matrix for accuracy, then undo the scaling.
  const d = new Float64Array(p);
  for (let j = 0; j < p; j++) d[j] = Math.sqrt(A[j * p + j]) || 1;
  const L = new Float64Array(p * p);
  for (let a = 0; a < p; a++) for (let b = 0; b <= a; b++) L[a * p + b] = A[a * p + b] / (d[a] * d[b]);
  if (!choleskyInPlace(L, p) || !(dof > 0)) {
    return { sigma, covariance: null, standardErrors: new Array(p).fill(null), correlation: identity(p), high: [] };
  }
  const cov = new Float64Array(p * p);
  const col = new Float64Array(p);
  for (let b = 0; b < p; b++) {
    col.fill(0);
    col[b] = 1;
    choleskySolveInPlace(L, p, col);
    for (let a = 0; a < p; a++) cov[a * p + b] = (sigma * sigma * col[a]) / (d[a] * d[b]);
  }
  const se = Array.from({ length: p }, (_, j) => Math.sqrt(cov[j * p + j]));
  const correlation: number[][] = [];
  const high: Uncertainty['high'] = [];
  for (let a = 0; a < p; a++) {
    const row: number[] = [];
    for (let b = 0; b < p; b++) {
      const r = a === b ? 1 : cov[a * p + b] / (se[a] * se[b]);
      row.push(r);
      if (b > a && Math.abs(r) > HIGH_CORRELATION) high.push({ a, b, r });
    }
    correlation.push(row);
  }
  high.sort((x, y) => Math.abs(y.r) - Math.abs(x.r));
  return { sigma, covariance: cov, standardErrors: se, correlation, high };
}

function identity(p: number): number[][] {
  return Array.from({ length: p }, (_, a) => Array.from({ length: p }, (_, b) => (a === b ? 1 : 0)));
}
