/**
 * Validation helpers: which poses fit and which are held out, k-fold partitions, standardised residuals.
 *
 * Roles. Excluded poses (by label — every visit of that label — or "line:N" for one row) take no part.
 * Held out: with useSplitColumn, the poses whose split column says 'validate'; when no pose carries a
 * split value, a seeded random fraction `holdout` of the pose labels (all visits of a label go to the
 * same side, so repeat visits never leak between fit and hold-out).
 *
 * Standardised residual of a pose with 3-D residual e (mm), point Jacobian J_i (3×p) and
 * C = (JᵀWJ)⁻¹: the leverage block H_i = J_i C J_iᵀ (through the inverse Cholesky factor) gives Var(e) = σ²(I − H_i) for a fit pose and
 * σ²(I + H_i) for a pose not in the fit (Cook & Weisberg, "Residuals and Influence in Regression", 1982,
 * internally studentised residuals and prediction errors). We report s = √(eᵀ(I ∓ H_i)⁻¹e / 3) / σ, the RMS
 * of the three studentised coordinates, so s ≈ 1 for an ordinary pose.
 */
import type { SessionPose } from './types';
import { EngineInputError } from './types';
import { scaledCholesky } from './linalg';
import { seededRandom } from './random';


export type PoseRole = 'fit' | 'holdout' | 'excluded';

function shuffled<T>(items: T[], random: () => number): T[] {
  const a = items.slice();
  for (let i = a.length - 1; i > 0; i--) {
    const j = Math.floor(random() * (i + 1));
    [a[i], a[j]] = [a[j], a[i]];
  }
  return a;
}

export interface RoleOptions {
  holdout: number;
  seed: number;
  useSplitColumn: boolean;
  exclude: string[];
}

export function assignRoles(poses: SessionPose[], o: RoleOptions): PoseRole[] {
  const roles: PoseRole[] = poses.map(() => 'fit');
  const problems: { message: string; column?: string }[] = [];
  for (const e of o.exclude) {
    const m = /^line:(\d+)$/.exec(e);
    let hit = false;
    poses.forEach((p, i) => {
      if (m ? p.line === Number(m[1]) : p.label === e) {
        roles[i] = 'excluded';
        hit = true;
      }
    });
    if (!hit) problems.push({ column: 'exclude', message: m ? `no pose on line ${m[1]} to exclude` : `no pose labelled "${e}" to exclude` });
  }
  if (problems.length) throw new EngineInputError(problems);
  const hasSplit = o.useSplitColumn && poses.some((p) => p.split !== undefined);
  if (hasSplit) {
    poses.forEach((p, i) => {
      if (roles[i] === 'fit' && p.split === 'validate') roles[i] = 'holdout';
    });
    return roles;
  }
  if (o.holdout > 0) {
    const labels = [...new Set(poses.filter((_, i) => roles[i] === 'fit').map((p) => p.label))];
    if (labels.length >= 2) {
      const take = Math.min(labels.length - 1, Math.max(1, Math.round(o.holdout * labels.length)));
      const held = new Set(shuffled(labels, seededRandom(o.seed)).slice(0, take));
      poses.forEach((p, i) => {
        if (roles[i] === 'fit' && held.has(p.label)) roles[i] = 'holdout';
      });
    }
  }
  return roles;
}

/** Fold number (0..k−1) of each label, seeded; all visits of a label share a fold. */
export function kFoldAssignment(labels: string[], k: number, seed: number): number[] {
  const unique = shuffled([...new Set(labels)], seededRandom(seed ^ 0x5bd1e995));
  const fold = new Map<string, number>();
  unique.forEach((l, i) => fold.set(l, i % k));
  return labels.map((l) => fold.get(l)!);
}

/**
 * Factor for leverages: with A = JᵀWJ = D·S·D (D = √diag A) and S = LLᵀ, the leverage block of a pose is
 * H = J A⁻¹ Jᵀ = WᵀW with W = L⁻¹ D⁻¹ Jᵀ. The lower-triangular G = L⁻¹ D⁻¹ is formed once (p³/6, by
 * forward substitution on the identity), so each pose costs three independent triangular products instead
 * of three dependent triangular solves. Returns null when A is singular.
 */
export function leverageFactor(A: Float64Array, p: number): { L: Float64Array; d: Float64Array; G: Float64Array } | null {
  const f = scaledCholesky(A, p);
  if (!f) return null;
  const { L, d } = f;
  // Column c of L⁻¹ by forward substitution (zero above the diagonal), then scaled by 1/d_c.
  const G = new Float64Array(p * p);
  for (let c = 0; c < p; c++) {
    G[c * p + c] = 1 / L[c * p + c];
    for (let i = c + 1; i < p; i++) {
      let s = 0;
      const li = i * p;
      for (let k = c; k < i; k++) s -= L[li + k] * G[k * p + c];
      G[li + c] = s / L[li + i];
    }
  }
  for (let i = 0; i < p; i++) for (let c = 0; c <= i; c++) G[i * p + c] /= d[c];
  return { L, d, G };
}

/**
 * s = √(eᵀ(I + sign·H)⁻¹e / 3) / σ for a pose with residual e and point Jacobian J (interleaved by
 * column: J[3k + r]); sign = −1 for a pose in the fit, +1 for one outside it. `tmp` holds 3p numbers.
 * Returns null when I − H is singular (a pose with leverage 1, which alone determines some parameter).
 */
export function standardisedResidual(
  e: ArrayLike<number>, J: Float64Array, f: { G: Float64Array }, p: number, sigma: number, sign: 1 | -1, tmp: Float64Array,
): number | null {
  const G = f.G;
  // W (3 columns of length p, at tmp[r·p + i]) = G Jᵀ; H = WᵀW accumulated on the way.
  let h00 = 0, h01 = 0, h02 = 0, h11 = 0, h12 = 0, h22 = 0;
  // Rows i and i + 1 of W together (each Jacobian entry loaded once for both); same sums, same order.
  let i = 0;
  for (; i + 1 < p; i += 2) {
    const gi = i * p, gn = gi + p;
    let w0 = 0, w1 = 0, w2 = 0, v0 = 0, v1 = 0, v2 = 0;
    for (let k = 0; k <= i; k++) {
      const g = G[gi + k], h = G[gn + k];
      const j0 = J[3 * k], j1 = J[3 * k + 1], j2 = J[3 * k + 2];
      w0 += g * j0; w1 += g * j1; w2 += g * j2;
      v0 += h * j0; v1 += h * j1; v2 += h * j2;
    }
    const h = G[gn + i + 1], k3 = 3 * (i + 1);
    v0 += h * J[k3]; v1 += h * J[k3 + 1]; v2 += h * J[k3 + 2];
    tmp[i] = w0; tmp[p + i] = w1; tmp[2 * p + i] = w2;
    tmp[i + 1] = v0; tmp[p + i + 1] = v1; tmp[2 * p + i + 1] = v2;
    h00 += w0 * w0; h01 += w0 * w1; h02 += w0 * w2;
    h11 += w1 * w1; h12 += w1 * w2; h22 += w2 * w2;
    h00 += v0 * v0; h01 += v0 * v1; h02 += v0 * v2;
    h11 += v1 * v1; h12 += v1 * v2; h22 += v2 * v2;
  }
  for (; i < p; i++) {
    const gi = i * p;
    let w0 = 0, w1 = 0, w2 = 0;
    for (let k = 0; k <= i; k++) {
      const g = G[gi + k];
      w0 += g * J[3 * k];
      w1 += g * J[3 * k + 1];
      w2 += g * J[3 * k + 2];
    }
    tmp[i] = w0; tmp[p + i] = w1; tmp[2 * p + i] = w2;
    h00 += w0 * w0; h01 += w0 * w1; h02 += w0 * w2;
    h11 += w1 * w1; h12 += w1 * w2; h22 += w2 * w2;
  }
  const m0 = 1 + sign * h00, m1 = sign * h01, m2 = sign * h02, m4 = 1 + sign * h11, m5 = sign * h12, m8 = 1 + sign * h22;
  const m3 = m1, m6 = m2, m7 = m5;
  // Solve M x = e by Cramer's rule (3×3).
  const det = m0 * (m4 * m8 - m5 * m7) - m1 * (m3 * m8 - m5 * m6) + m2 * (m3 * m7 - m4 * m6);
  if (!(Math.abs(det) > 1e-12) || !(sigma > 0)) return null;
  const e0 = e[0], e1 = e[1], e2 = e[2];
  const x0 = (e0 * (m4 * m8 - m5 * m7) - m1 * (e1 * m8 - m5 * e2) + m2 * (e1 * m7 - m4 * e2)) / det;
  const x1 = (m0 * (e1 * m8 - m5 * e2) - e0 * (m3 * m8 - m5 * m6) + m2 * (m3 * e2 - e1 * m6)) / det;
  const x2 = (m0 * (m4 * e2 - e1 * m7) - m1 * (m3 * e2 - e1 * m6) + e0 * (m3 * m7 - m4 * m6)) / det;
  const q = e0 * x0 + e1 * x1 + e2 * x2;
  return Math.sqrt(Math.max(q, 0) / 3) / sigma;
}
