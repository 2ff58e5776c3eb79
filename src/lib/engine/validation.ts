/**
 * Validation helpers: which poses fit and which are held out, k-fold partitions, standardised residuals.
 *
 * Roles. Excluded poses (by label — every visit of that label — or "line:N" for one row) take no part.
 * Held out: with useSplitColumn, the poses whose split column says 'validate'; when no pose carries a
 * split value, a seeded random fraction `holdout` of the pose labels (all visits of a label go to the
 * same side, so repeat visits never leak between fit and hold-out).
 *
 * Standardised residual of a pose with 3-D residual e (mm), point Jacobian J_i (3×p) and
 * C = (JᵀWJ)⁻¹: the leverage block H_i = J_i C J_iᵀ (computed by triangular solves) gives Var(e) = σ²(I − H_i) for a fit pose and
 * σ²(I + H_i) for a pose not in the fit (Cook & Weisberg, "Residuals and Influence in Regression", 1982,
 * internally studentised residuals and prediction errors). We report s = √(eᵀ(I ∓ H_i)⁻¹e / 3) / σ, the RMS
 * of the three studentised coordinates, so s ≈ 1 for an ordinary pose.
 */
import type { SessionPose } from './types';
import { EngineInputError } from './types';
import { choleskyInPlace } from './lm';
import { seededRandom } from './workspace';

export { seededRandom };

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
 * H = J A⁻¹ Jᵀ = WᵀW with W = L⁻¹ D⁻¹ Jᵀ (triangular solves, no inverse). Returns null when A is singular.
 */
export function leverageFactor(A: Float64Array, p: number): { L: Float64Array; d: Float64Array } | null {
  const d = new Float64Array(p);
  for (let j = 0; j < p; j++) d[j] = Math.sqrt(A[j * p + j]) || 1;
  const L = new Float64Array(p * p);
  for (let a = 0; a < p; a++) for (let b = 0; b <= a; b++) L[a * p + b] = A[b * p + a] / (d[a] * d[b]);
  return choleskyInPlace(L, p) ? { L, d } : null;
}

/**
 * s = √(eᵀ(I + sign·H)⁻¹e / 3) / σ for a pose with residual e and point Jacobian J (interleaved by
 * column: J[3k + r]); sign = −1 for a pose in the fit, +1 for one outside it. `tmp` holds 3p numbers.
 * Returns null when I − H is singular (a pose with leverage 1, which alone determines some parameter).
 */
export function standardisedResidual(
  e: ArrayLike<number>, J: Float64Array, f: { L: Float64Array; d: Float64Array }, p: number, sigma: number, sign: 1 | -1, tmp: Float64Array,
): number | null {
  const L = f.L, d = f.d;
  // W (3 columns of length p, at tmp[r·p + i]) = L⁻¹ D⁻¹ Jᵀ.
  for (let r = 0; r < 3; r++) {
    const o = r * p;
    for (let i = 0; i < p; i++) {
      let s = J[3 * i + r] / d[i];
      const li = i * p;
      for (let k = 0; k < i; k++) s -= L[li + k] * tmp[o + k];
      tmp[o + i] = s / L[li + i];
    }
  }
  const M = [0, 0, 0, 0, 0, 0, 0, 0, 0];
  for (let r = 0; r < 3; r++) {
    for (let c = r; c < 3; c++) {
      let h = 0;
      for (let i = 0; i < p; i++) h += tmp[r * p + i] * tmp[c * p + i];
      M[3 * r + c] = M[3 * c + r] = (r === c ? 1 : 0) + sign * h;
    }
  }
  // Solve M x = e by Cramer's rule (3×3).
  const det = M[0] * (M[4] * M[8] - M[5] * M[7]) - M[1] * (M[3] * M[8] - M[5] * M[6]) + M[2] * (M[3] * M[7] - M[4] * M[6]);
  if (!(Math.abs(det) > 1e-12) || !(sigma > 0)) return null;
  const x0 = (e[0] * (M[4] * M[8] - M[5] * M[7]) - M[1] * (e[1] * M[8] - M[5] * e[2]) + M[2] * (e[1] * M[7] - M[4] * e[2])) / det;
  const x1 = (M[0] * (e[1] * M[8] - M[5] * e[2]) - e[0] * (M[3] * M[8] - M[5] * M[6]) + M[2] * (M[3] * e[2] - e[1] * M[6])) / det;
  const x2 = (M[0] * (M[4] * e[2] - e[1] * M[7]) - M[1] * (M[3] * e[2] - e[1] * M[6]) + e[0] * (M[3] * M[7] - M[4] * M[6])) / det;
  const q = e[0] * x0 + e[1] * x1 + e[2] * x2;
  return Math.sqrt(Math.max(q, 0) / 3) / sigma;
}
