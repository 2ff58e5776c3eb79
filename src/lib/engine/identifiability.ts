/**
 * Identifiability: which candidate parameters the poses can determine, and how well.
 *
 * Selection. The Jacobian columns are scaled to unit length (Jacobi scaling), so the scaled normal matrix
 * S = D⁻¹ JᵀJ D⁻¹ has a unit diagonal. Columns are taken in a fixed priority order — base frame, tool point,
 * then the joints from the first to the last — and each is kept only if its component orthogonal to the
 * columns kept so far is not negligible: with the Cholesky factor L of the kept block, y = L⁻¹ S_Kj and
 * r_j = 1 − |y|² = sin² of the angle between column j and the span of the kept columns. This is QR with the
 * pivot order prescribed (RᵀR = S), a rank-revealing selection that prefers to keep the base and tool
 * frames, so the joint parameter that duplicates them is the one fixed at nominal. A column is dependent
 * when r_j < RANK_TOLERANCE (sin < 3·10⁻⁵). Exact (structural) redundancies give r_j ≈ 10⁻¹⁴ whatever the
 * noise, because the Jacobian comes from the model; real but weak parameters give r_j ≥ 10⁻⁶.
 * The combination c = L⁻ᵀy tells which kept parameters duplicate the fixed one; the reason names them.
 *
 * Observability. Singular values of the identified columns, with lengths in mm and angles multiplied by a
 * characteristic length L (Hollerbach & Wampler 1996), are computed as the square roots of the
 * eigenvalues of the scaled normal matrix (cyclic Jacobi on a flat array, linalg.ts, which is accurate for the small
 * eigenvalues too — Demmel & Veselić 1992; checked against ml-matrix's EVD in the tests). Squaring limits the resolvable ratio
 * to about √ε ≈ 10⁻⁸, far beyond the conditioning of a kept set (r_j ≥ 10⁻⁹ per column). Indices, with m the
 * number of poses and σ_1 ≥ … ≥ σ_p:
 *   O1 = (σ_1⋯σ_p)^(1/p) / √m            (Borm & Menq 1991)
 *   O3 = σ_p                             (minimum singular value; Nahvi, Hollerbach & Hayward 1994)
 *   O4 = σ_p² / σ_1                      (noise amplification index; Nahvi & Hollerbach 1996)
 *   condition number = σ_1 / σ_p.
 */
import type { ArmGeometry } from './types';
import type { ParameterInfo } from './parameters';
import { symmetricEigenvalues } from './linalg';
import { FRAME_SIZE, baseOffset, toolOffset } from './layout';

export const RANK_TOLERANCE = 1e-9;
/** Columns shorter than this fraction of the longest scaled column do not move the point at all. */
const ZERO_COLUMN = 1e-10;

export interface FixedParameter {
  info: ParameterInfo;
  reason: string;
  /** Kept parameters that duplicate it, strongest first. */
  relatedKeys: string[];
}

export interface IdentifiabilityResult {
  /** Indices into the candidate list, in candidate order. */
  identified: number[];
  fixed: { candidate: number; fixed: FixedParameter }[];
}

/** Order in which candidates enter the selection: base (0..5), tool position (6..8), then the joints. */
function priority(info: ParameterInfo, jointCount: number): number {
  if (info.owner === 'base') return info.index - baseOffset(jointCount);
  if (info.owner === 'tool') return FRAME_SIZE + info.index - toolOffset(jointCount);
  return 20 + info.index;
}

/** Decide which candidates are identifiable from A = JᵀWJ over the candidates (p×p row-major, full). */
export function selectIdentifiable(
  A: Float64Array, candidates: ParameterInfo[], geometry: ArmGeometry, stillJoints: string[] = [],
): IdentifiabilityResult {
  const p = candidates.length;
  const n = geometry.joints.length;
  const d = new Float64Array(p);
  let dmax = 0;
  for (let j = 0; j < p; j++) {
    d[j] = Math.sqrt(Math.max(A[j * p + j], 0));
    dmax = Math.max(dmax, d[j]);
  }
  const order = candidates.map((_, j) => j).sort((a, b) => priority(candidates[a], n) - priority(candidates[b], n));
  // A revolute joint whose zero-offset column vanishes turns the point about itself: the point is on its axis.
  const pointOnAxis = candidates
    .filter((c, j) => c.owner === 'joint' && c.name === 'theta' && geometry.joints[c.jointIndex!].type === 'revolute' && d[j] <= ZERO_COLUMN * dmax)
    .map((c) => geometry.joints[c.jointIndex!].name);
  const kept: number[] = [];
  // Rows of the lower-triangular factor of S restricted to the kept set, in kept order.
  const L: number[][] = [];
  const fixed: IdentifiabilityResult['fixed'] = [];
  const S = (a: number, b: number) => A[a * p + b] / (d[a] * d[b]);
  for (const j of order) {
    const info = candidates[j];
    if (d[j] <= ZERO_COLUMN * dmax) {
      const onAxis = info.name === 'theta' && pointOnAxis.includes(geometry.joints[info.jointIndex!].name)
        ? ` (the measured point lies on the axis of ${geometry.joints[info.jointIndex!].name})` : '';
      fixed.push({ candidate: j, fixed: { info, reason: `no effect: ${info.key} does not move the measured point on these poses${onAxis}`, relatedKeys: [] } });
      continue;
    }
    const k = kept.length;
    const y = new Float64Array(k);
    for (let a = 0; a < k; a++) {
      let s = S(kept[a], j);
      for (let b = 0; b < a; b++) s -= L[a][b] * y[b];
      y[a] = s / L[a][a];
    }
    let yy = 0;
    for (let a = 0; a < k; a++) yy += y[a] * y[a];
    const r = 1 - yy;
    if (r < RANK_TOLERANCE) {
      // c = L⁻ᵀ y: scaled column j ≈ Σ c_a · scaled column kept[a].
      const c = new Float64Array(k);
      for (let a = k - 1; a >= 0; a--) {
        let s = y[a];
        for (let b = a + 1; b < k; b++) s -= L[b][a] * c[b];
        c[a] = s / L[a][a];
      }
      const cmax = Math.max(...Array.from(c, Math.abs));
      const related = Array.from(c, (v, a) => ({ a, w: Math.abs(v) }))
        .filter((e) => e.w > 0.05 * cmax)
        .sort((x, z) => z.w - x.w)
        .map((e) => candidates[kept[e.a]]);
      fixed.push({ candidate: j, fixed: { info, reason: explain(info, related, geometry, stillJoints, pointOnAxis), relatedKeys: related.map((r) => r.key) } });
      continue;
    }
    const row = Array.from(y);
    row.push(Math.sqrt(r));
    L.push(row);
    kept.push(j);
  }
  return { identified: kept.slice().sort((a, b) => a - b), fixed: fixed.sort((a, b) => a.candidate - b.candidate) };
}

function label(info: ParameterInfo): string {
  if (info.owner === 'base') return `base ${info.name}`;
  if (info.owner === 'tool') return `tool ${info.name}`;
  return info.key;
}

/** Consecutive joint axes i and i+1 parallel (configuration-independent: depends on alpha_i, beta_i only). */
function axesParallel(g: ArmGeometry, i: number): boolean {
  const dhIndex = g.convention === 'dh' ? i : i + 1;
  const j = g.joints[dhIndex];
  if (!j || i + 1 >= g.joints.length) return false;
  const c = Math.cos((j.alpha * Math.PI) / 180) * Math.cos(((j.beta ?? 0) * Math.PI) / 180);
  return Math.abs(Math.abs(c) - 1) < 1e-9;
}

function list(infos: ParameterInfo[]): string {
  const names = infos.slice(0, 4).map(label);
  return names.length <= 1 ? (names[0] ?? 'other parameters') : `${names.slice(0, -1).join(', ')} and ${names[names.length - 1]}`;
}

/**
 * A plain-words reason for a parameter fixed at nominal, from the relation detected. `stillJoints` names
 * joints whose readings barely change over the poses (their links then act as one rigid body).
 */
export function explain(
  info: ParameterInfo, related: ParameterInfo[], g: ArmGeometry, stillJoints: string[] = [], pointOnAxis: string[] = [],
): string {
  const n = g.joints.length;
  const key = info.key;
  const allBase = related.length > 0 && related.every((r) => r.owner === 'base');
  const allTool = related.length > 0 && related.every((r) => r.owner === 'tool');
  const head = `redundant with ${list(related)}`;
  const i = info.jointIndex ?? 0;
  // Joint axes 1 … i+1 all parallel (so joint i+1's axis is parallel to the first joint's).
  const parallelUpTo = (k: number) => Array.from({ length: k }, (_, m) => axesParallel(g, m)).every(Boolean);
  const allParallel = parallelUpTo(n - 1);
  if (info.owner === 'joint' && allBase) {
    if (i === 0 && info.name === 'd' && g.joints[0].type === 'revolute') return `${head}: ${key} moves the whole arm along the base axis`;
    if (i === 0 && info.name === 'theta' && g.joints[0].type === 'revolute') return `${head}: ${key} turns the whole arm about the base axis`;
    if (info.name === 'd' && parallelUpTo(i)) return `${head}: with parallel joint axes, ${key} shifts the rest of the arm along the common axis, as the base frame does`;
    return `${head}: ${key} is a fixed offset of the whole arm, which the base frame already describes`;
  }
  if (info.owner === 'tool' && allBase) {
    if (allParallel) return `${head}: with all joint axes parallel, ${key} shifts every measured point along the common axis, as the base frame does`;
    return `${head}: on these poses ${key} shifts every measured point the same way the base frame does`;
  }
  if (info.owner === 'joint' && allTool) {
    if (i === n - 1) return `${head}: ${key} comes after the last joint's motion, so it only shifts the tool point, which the tool point already describes`;
    return `${head}: ${key} only shifts the tool point in the flange frame, which the tool point already describes`;
  }
  if (info.owner === 'joint') {
    const joint = g.joints[i];
    const parallel = axesParallel(g, i - 1) || axesParallel(g, i);
    if (joint.type === 'prismatic') {
      return `${head}: the prismatic joint ${joint.name} only slides along its axis, so ${key} acts on the points as these parameters do`;
    }
    if (info.name === 'd' && parallel) {
      return `${head}: with consecutive parallel joint axes, ${key} and these parameters shift the rest of the arm along the same direction`;
    }
    if (info.name === 'theta' && parallel) {
      return `${head}: with consecutive parallel joint axes, ${key} and these parameters turn the rest of the arm about the same direction`;
    }
  }
  const notes: string[] = [];
  if (stillJoints.length) notes.push(`${stillJoints.join(', ')} ${stillJoints.length > 1 ? 'do' : 'does'} not move on these poses, which merges links`);
  if (pointOnAxis.length) notes.push(`the measured point lies on the axis of ${pointOnAxis.join(', ')}, so turning ${pointOnAxis.length > 1 ? 'them' : 'it'} does not move the point`);
  return `${head}: on these poses ${key} changes the measured points only in the way a combination of them does, so the data cannot tell them apart${notes.map((x) => `; ${x}`).join('')}`;
}

export interface Observability {
  conditionNumber: number;
  O1: number;
  O3: number;
  O4: number;
  singularValues: number[];
  rank: number;
  parameterCount: number;
}

/**
 * Observability of the parameters `infos` from A = JᵀWJ over them (p×p row-major, full), with angle
 * columns scaled by `characteristicLength` (mm). `poseCount` is m in O1.
 */
export function observability(A: Float64Array, infos: ParameterInfo[], characteristicLength: number, poseCount: number, parameterCount = infos.length): Observability {
  const p = infos.length;
  if (p === 0) return { conditionNumber: 0, O1: 0, O3: 0, O4: 0, singularValues: [], rank: 0, parameterCount };
  const s = infos.map((i) => (i.unit === 'deg' ? 1 / characteristicLength : 1));
  const M = new Float64Array(p * p);
  for (let a = 0; a < p; a++) for (let b = 0; b < p; b++) M[a * p + b] = A[a * p + b] * s[a] * s[b];
  const sv = Array.from(symmetricEigenvalues(M, p), (l) => Math.sqrt(Math.max(l, 0))).sort((x, y) => y - x);
  const smax = sv[0], smin = sv[p - 1];
  const tol = smax * 1e-8 * Math.max(p, 1);
  const rank = sv.filter((v) => v > tol).length;
  let logSum = 0;
  for (const v of sv) logSum += Math.log(Math.max(v, Number.MIN_VALUE));
  return {
    conditionNumber: smin > 0 ? smax / smin : Infinity,
    O1: Math.exp(logSum / p) / Math.sqrt(Math.max(poseCount, 1)),
    O3: smin,
    O4: smax > 0 ? (smin * smin) / smax : 0,
    singularValues: sv,
    rank,
    parameterCount,
  };
}
