/**
 * Uncertainty of the identified parameters from the final normal matrix and the residual variance
 * (linearised least squares, e.g. Seber & Wild, "Nonlinear Regression", 1989, ch. 2):
 *   σ² = SSR / (m − p) with m residual coordinates and p identified parameters,
 *   Cov = σ² (JᵀWJ)⁻¹, standard error = √Cov_jj, correlation r_ij = Cov_ij / √(Cov_ii Cov_jj).
 * (JᵀWJ)⁻¹ is formed column by column from its Cholesky factor, the one place where the inverse itself
 * is the wanted result.
 */
import { multiplySquare, scaledCholesky, scaledInverse } from './linalg';
import { HIGH_CORRELATION } from './thresholds';

export { HIGH_CORRELATION };

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
  const f = scaledCholesky(A, p);
  if (!f || !(dof > 0)) {
    return { sigma, covariance: null, standardErrors: new Array(p).fill(null), correlation: identity(p), high: [] };
  }
  const cov = scaledInverse(f, p, sigma * sigma);
  return { sigma, covariance: cov, ...summariseCovariance(cov, p) };
}

/** Standard errors, correlation matrix and the pairs above HIGH_CORRELATION of a p×p covariance. */
export function summariseCovariance(cov: Float64Array, p: number): Pick<Uncertainty, 'standardErrors' | 'correlation' | 'high'> {
  const se = Array.from({ length: p }, (_, j) => Math.sqrt(Math.max(cov[j * p + j], 0)));
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
  return { standardErrors: se, correlation, high };
}

/**
 * Sandwich covariance of an M-estimator (Huber 1967, "The behavior of maximum likelihood estimates under
 * nonstandard conditions"; the small-sample factor m/(m − p) is White's HC1, MacKinnon & White 1985):
 *   Cov = H⁻¹ · B · H⁻¹ · m / (m − p),
 *   H = Σ_i J_iᵀ ∇²ρ(r_i) J_i           (bread: the loss's Hessian per pose, 3×3),
 *   B = Σ_i (J_iᵀ ψ_i)(J_iᵀ ψ_i)ᵀ,  ψ_i = ρ'(e_i)·r_i / e_i   (meat: the scores per pose),
 * with r_i the pose's 3-vector residual, e_i = |r_i|, ρ the loss of the 3-D error and J_i its 3×p Jacobian.
 * For ρ(e) of the length e, ∇²ρ(r) = w·(I − uuᵀ) + ρ''(e)·uuᵀ with w = ρ'(e)/e (the IRLS weight) and
 * u = r/e. Inputs: H and B accumulated by the caller (p×p row-major, full), m residual coordinates.
 * Returns null when H is singular.
 */
export function sandwichCovariance(H: Float64Array, B: Float64Array, p: number, m: number): Float64Array | null {
  const f = scaledCholesky(H, p);
  if (!f || !(m > p)) return null;
  // Hinv = D⁻¹ (scaled H)⁻¹ D⁻¹, column by column.
  const Hi = scaledInverse(f, p);
  const cov = multiplySquare(multiplySquare(Hi, B, p), Hi, p);
  const k = m / (m - p);
  for (let j = 0; j < p * p; j++) cov[j] *= k;
  // Symmetrise rounding.
  for (let a = 0; a < p; a++) for (let b = a + 1; b < p; b++) cov[a * p + b] = cov[b * p + a] = 0.5 * (cov[a * p + b] + cov[b * p + a]);
  return cov;
}

function identity(p: number): number[][] {
  return Array.from({ length: p }, (_, a) => Array.from({ length: p }, (_, b) => (a === b ? 1 : 0)));
}
