/**
 * Pose planning: choose K joint configurations, from random candidates within the joint limits, that
 * maximise an observability index of the parameters the session is meant to identify.
 *
 * Method: greedy D-optimal selection (each step adds the candidate with the largest
 * det(I₃ + J_c A⁻¹ J_cᵀ), i.e. the largest growth of det A = Πσ², which is O1's numerator), followed by
 * an exchange pass that swaps chosen poses for candidates while the chosen index improves (in the spirit
 * of the DETMAX exchange of Mitchell 1974; for calibration pose selection see Sun & Hollerbach 2008).
 * Columns are scaled as in the fit report's indices: lengths in mm, angles × characteristic length.
 */
import type { ArmGeometry, ParameterGroup } from './types';
import { EngineInputError, PARAMETER_GROUPS } from './types';
import { compileArm, createArmData, forwardKinematics, jointsToInternal, type ArmData, type ArmModel } from './kinematics';
import { pointJacobian } from './jacobian';
import { candidateParameters, characteristicLength, type ParameterInfo } from './parameters';
import { observability, selectIdentifiable } from './identifiability';
import { choleskyInto, subMatrix } from './linalg';
import { seededRandom } from './random';
import { jointRanges } from './workspace';

export interface PlanOptions {
  /** Number of poses K. */
  count: number;
  /** Random candidates drawn within the joint limits. Default 2000. */
  candidates?: number;
  /** Seed of the draw. Default 1. */
  seed?: number;
  /** Parameter groups to plan for. Default all. */
  groups?: ParameterGroup[];
  /** Index to maximise. Default 'O1'. */
  index?: 'O1' | 'O3' | 'O4';
}

export interface PoseSetQuality {
  O1: number;
  O3: number;
  O4: number;
  conditionNumber: number;
  identifiable: number;
  parameterCount: number;
  warnings: string[];
}


function randomConfigurations(g: ArmGeometry, count: number, seed: number): number[][] {
  const r = seededRandom(seed);
  const lim = jointRanges(g);
  return Array.from({ length: count }, () => lim.map(([lo, hi]) => lo + (hi - lo) * r()));
}

/** Scaled Jacobian rows of every configuration over `params`: out[(3c + r)·p + k]. */
function jacobianRows(model: ArmModel, data: ArmData, qs: number[][], params: ParameterInfo[], L: number): Float64Array {
  const p = params.length;
  const cols = Int32Array.from(params, (x) => x.index);
  const scale = params.map((x) => (x.unit === 'deg' ? 1 / L : 1));
  const out = new Float64Array(3 * qs.length * p);
  const q = new Float64Array(model.n);
  const J = new Float64Array(3 * p);
  qs.forEach((cfg, c) => {
    jointsToInternal(model, cfg, q);
    forwardKinematics(model, data, q, { withDerivatives: true });
    pointJacobian(model, data, cols, J);
    for (let k = 0; k < p; k++) for (let r = 0; r < 3; r++) out[(3 * c + r) * p + k] = J[3 * k + r] * scale[k];
  });
  return out;
}

function addRows(A: Float64Array, rows: Float64Array, c: number, p: number, sign: 1 | -1): void {
  for (let r = 0; r < 3; r++) {
    const o = (3 * c + r) * p;
    for (let a = 0; a < p; a++) {
      const ja = sign * rows[o + a];
      for (let b = 0; b < p; b++) A[a * p + b] += ja * rows[o + b];
    }
  }
}

function indexValue(A: Float64Array, params: ParameterInfo[], m: number, index: 'O1' | 'O3' | 'O4'): number {
  if (index === 'O1') {
    // log det via Cholesky: monotone in O1 for a fixed number of poses.
    const p = params.length;
    const L = new Float64Array(p * p);
    if (!choleskyInto(A, p, L)) return -Infinity;
    let s = 0;
    for (let i = 0; i < p; i++) s += Math.log(L[i * p + i]);
    return s;
  }
  // The rows are already scaled, so characteristic length 1 here.
  const o = observability(A, params.map((x) => ({ ...x, unit: 'mm' as const })), 1, m);
  return index === 'O3' ? o.O3 : o.O4;
}

export function planPoses(geometry: ArmGeometry, options: PlanOptions): { q: number[][]; quality: PoseSetQuality } {
  const count = options.count;
  const nCand = options.candidates ?? 2000;
  const seed = options.seed ?? 1;
  const index = options.index ?? 'O1';
  const groups = options.groups ?? [...PARAMETER_GROUPS];
  if (!(Number.isInteger(count) && count >= 1)) throw new EngineInputError([{ column: 'count', message: `pose count ${count} is not valid`, expected: 'a whole number ≥ 1' }]);
  if (!(Number.isInteger(nCand) && nCand >= count)) throw new EngineInputError([{ column: 'candidates', message: `${nCand} candidates cannot give ${count} poses`, expected: `at least ${count} candidates` }]);
  const model = compileArm(geometry);
  const data = createArmData(model);
  const L = characteristicLength(geometry);
  const cands = randomConfigurations(geometry, nCand, seed);
  const all = candidateParameters(model.layout, groups);
  const rowsAll = jacobianRows(model, data, cands, all, L);
  // Parameters a well-spread set can determine (structural identifiability over all candidates).
  const pa = all.length;
  const Aall = new Float64Array(pa * pa);
  for (let c = 0; c < nCand; c++) addRows(Aall, rowsAll, c, pa, 1);
  const ids = selectIdentifiable(Aall, all, geometry).identified;
  const params = ids.map((k) => all[k]);
  const p = params.length;
  const rows = new Float64Array(3 * nCand * p);
  for (let c = 0; c < 3 * nCand; c++) for (let k = 0; k < p; k++) rows[c * p + k] = rowsAll[c * pa + ids[k]];

  // Greedy D-optimal start, regularised so the first steps are defined.
  let trace = 0;
  for (const k of ids) trace += Aall[k * pa + k];
  const eps = (1e-6 * trace) / (pa * nCand);
  const A = new Float64Array(p * p);
  for (let k = 0; k < p; k++) A[k * p + k] = eps;
  const chosen: number[] = [];
  const used = new Uint8Array(nCand);
  const Lf = new Float64Array(p * p);
  const w = new Float64Array(3 * p);
  for (let step = 0; step < count; step++) {
    choleskyInto(A, p, Lf);
    let best = -1, bestGain = -Infinity;
    for (let c = 0; c < nCand; c++) {
      if (used[c]) continue;
      // w_r = L⁻¹ J_rᵀ for the three rows; M = WᵀW = J A⁻¹ Jᵀ; gain = log det(I + M).
      for (let r = 0; r < 3; r++) {
        const o = (3 * c + r) * p;
        for (let i = 0; i < p; i++) {
          let s = rows[o + i];
          for (let k = 0; k < i; k++) s -= Lf[i * p + k] * w[r * p + k];
          w[r * p + i] = s / Lf[i * p + i];
        }
      }
      const m = [0, 0, 0, 0, 0, 0, 0, 0, 0];
      for (let r = 0; r < 3; r++) for (let s2 = r; s2 < 3; s2++) {
        let s = 0;
        for (let i = 0; i < p; i++) s += w[r * p + i] * w[s2 * p + i];
        m[3 * r + s2] = m[3 * s2 + r] = s + (r === s2 ? 1 : 0);
      }
      const det = m[0] * (m[4] * m[8] - m[5] * m[7]) - m[1] * (m[3] * m[8] - m[5] * m[6]) + m[2] * (m[3] * m[7] - m[4] * m[6]);
      const gain = Math.log(det);
      if (gain > bestGain) { bestGain = gain; best = c; }
    }
    chosen.push(best);
    used[best] = 1;
    addRows(A, rows, best, p, 1);
  }
  for (let k = 0; k < p; k++) A[k * p + k] -= eps;

  // Exchange pass on the chosen index.
  const r = seededRandom(seed ^ 0x9e3779b9);
  let current = indexValue(A, params, count, index);
  const trials = Math.min(4000, 40 * count);
  const B = new Float64Array(p * p);
  for (let t = 0; t < trials; t++) {
    const slot = Math.floor(r() * count);
    const cand = Math.floor(r() * nCand);
    if (used[cand]) continue;
    B.set(A);
    addRows(B, rows, chosen[slot], p, -1);
    addRows(B, rows, cand, p, 1);
    const v = indexValue(B, params, count, index);
    if (v > current) {
      used[chosen[slot]] = 0;
      used[cand] = 1;
      chosen[slot] = cand;
      A.set(B);
      current = v;
    }
  }
  const q = chosen.map((c) => cands[c]);
  return { q, quality: poseSetQuality(geometry, q, groups) };
}

/** Observability and plain-words warnings for a pose set (q in deg / mm). */
export function poseSetQuality(geometry: ArmGeometry, qs: number[][], groups: ParameterGroup[] = [...PARAMETER_GROUPS]): PoseSetQuality {
  const model = compileArm(geometry);
  const data = createArmData(model);
  const L = characteristicLength(geometry);
  const all = candidateParameters(model.layout, groups);
  const pa = all.length;
  const rows = jacobianRows(model, data, qs, all, L);
  const A = new Float64Array(pa * pa);
  for (let c = 0; c < qs.length; c++) addRows(A, rows, c, pa, 1);
  const sel = selectIdentifiable(A, all, geometry);
  const ids = sel.identified;
  const Aid = subMatrix(A, pa, ids);
  const params = ids.map((k) => all[k]);
  const o = observability(Aid, params.map((x) => ({ ...x, unit: 'mm' as const })), 1, qs.length, pa);
  const warnings: string[] = [];
  const p = ids.length;
  if (qs.length < p) warnings.push(`${qs.length} poses are fewer than the ${p} parameters they should determine: measure at least ${p} poses (two to three times as many is common practice)`);
  else if (qs.length < 2 * p) warnings.push(`${qs.length} poses for ${p} parameters leaves little redundancy: two to three times as many poses as parameters is common practice`);
  const lim = jointRanges(geometry);
  geometry.joints.forEach((j, k) => {
    let lo = Infinity, hi = -Infinity;
    for (const q of qs) { lo = Math.min(lo, q[k]); hi = Math.max(hi, q[k]); }
    const span = qs.length ? hi - lo : 0;
    const range = lim[k][1] - lim[k][0];
    const unit = j.type === 'prismatic' ? ' mm' : '°';
    if (span < 0.1 * range) warnings.push(`joint ${j.name} barely moves: its values span ${span.toFixed(1)}${unit} of its ${range.toFixed(0)}${unit} range`);
  });
  // Compare with a well-spread random set: parameters these poses cannot determine but others could.
  const ref = randomConfigurations(geometry, Math.max(200, 3 * pa), 12345);
  const rowsRef = jacobianRows(model, data, ref, all, L);
  const Aref = new Float64Array(pa * pa);
  for (let c = 0; c < ref.length; c++) addRows(Aref, rowsRef, c, pa, 1);
  const refIds = new Set(selectIdentifiable(Aref, all, geometry).identified);
  const lost = [...refIds].filter((k) => !ids.includes(k)).map((k) => all[k].key);
  if (lost.length) warnings.push(`these poses cannot determine ${lost.join(', ')}, which well-spread poses determine: vary the joints more`);
  return { O1: o.O1, O3: o.O3, O4: o.O4, conditionNumber: o.conditionNumber, identifiable: p, parameterCount: pa, warnings };
}
