/**
 * The arm's least squares problem and the steps around it: registering the measurement frame, choosing
 * the identifiable parameters on a set of poses, and identifying them by Levenberg–Marquardt.
 *
 * Residuals are predicted − measured points (mm) of the poses.
 */
import type { ArmGeometry, FrameSpec, SessionPose } from './types';
import type { ArmData, ArmModel } from './kinematics';
import { accumulateNormalEquations, normalWork, predictPoints, type NormalWork, type PoseBuffers } from './jacobian';
import { fromReportUnit, type ParameterInfo } from './parameters';
import { FRAME_FIELDS, FRAME_SIZE, baseParam } from './layout';
import { kabsch, transformToFrame } from './registration';
import { levenbergMarquardt, robustWeight, type LeastSquaresProblem } from './lm';
import { selectIdentifiable, type IdentifiabilityResult } from './identifiability';
import { subMatrix, symmetrize } from './linalg';
import { incrementAngles } from './rotations';
import type { IterationInfo, ResolvedFitOptions } from './fit-options';

/** Base frame registered by Kabsch from the nominal points (identity base) to the measured points. */
export function registerBase(model: ArmModel, data: ArmData, v: Float64Array, pb: PoseBuffers): { base: FrameSpec; rms: number } {
  const w = Float64Array.from(v);
  const b = model.layout.baseOffset;
  w.fill(0, b, b + FRAME_SIZE);
  const pred = new Float64Array(3 * pb.count);
  predictPoints(model, data, w, pb, pred);
  const T = kabsch(pred, pb.measured);
  return { base: transformToFrame(T), rms: T.rms };
}

/** The base frame (mm, deg) into the base entries of v (mm, rad). */
export function writeBase(model: ArmModel, v: Float64Array, base: FrameSpec): void {
  const info = model.layout.params;
  for (const f of FRAME_FIELDS) {
    const k = baseParam(model.n, f);
    v[k] = fromReportUnit(info[k], base[f]);
  }
}

/**
 * The arm least squares problem over the parameters `active` of the full vector v0: residuals are
 * predicted − measured points of the poses; normal equations accumulated in one pass per evaluation.
 * With a robust loss, `reweight` sets each pose's weight from its 3-D error (IRLS).
 */
export class ArmLeastSquares implements LeastSquaresProblem {
  readonly size: number;
  private readonly v: Float64Array;
  private readonly work: NormalWork;
  private readonly baseWeights: Float64Array;
  private readonly errors: Float64Array;
  private readonly pred: Float64Array;
  constructor(
    private readonly model: ArmModel, private readonly data: ArmData, private readonly pb: PoseBuffers,
    private readonly active: Int32Array, v0: Float64Array,
    private readonly robust: 'none' | 'huber' | 'cauchy', private readonly scale: number,
  ) {
    this.size = active.length;
    this.v = Float64Array.from(v0);
    this.work = normalWork(active.length);
    this.baseWeights = Float64Array.from(pb.weights);
    this.errors = new Float64Array(pb.count);
    this.pred = new Float64Array(3 * pb.count);
  }
  full(x: ArrayLike<number>): Float64Array {
    for (let k = 0; k < this.active.length; k++) this.v[this.active[k]] = x[k];
    return this.v;
  }
  cost(x: Float64Array): number {
    const v = this.full(x);
    predictPoints(this.model, this.data, v, this.pb, this.pred, this.errors);
    let c = 0;
    const w = this.pb.weights;
    for (let i = 0; i < this.pb.count; i++) c += w[i] * this.errors[i] * this.errors[i];
    return 0.5 * c;
  }
  normalEquations(x: Float64Array, A: Float64Array, g: Float64Array): number {
    const c = accumulateNormalEquations(this.model, this.data, this.full(x), this.pb, this.active, A, g, this.work);
    symmetrize(A, this.size);
    return c;
  }
  /**
   * With the base rotation identified in increments (data.baseIncrements), the step's three base
   * rotation entries are a small rotation ω about the measurement axes: B ← Exp([ω]×)·B, stored back as
   * the file's Z-Y-X angles (rotations.ts). Every other entry adds.
   */
  get retract(): ((x: Float64Array, step: Float64Array, out: Float64Array) => void) | undefined {
    const k = baseRotationPositions(this.model, this.active);
    if (!k || !this.data.baseIncrements) return undefined;
    return (x, step, out) => {
      const r = incrementAngles([x[k[0]], x[k[1]], x[k[2]]], step[k[0]], step[k[1]], step[k[2]]);
      out[k[0]] = r[0]; out[k[1]] = r[1]; out[k[2]] = r[2];
    };
  }
  get reweight(): ((x: Float64Array) => void) | undefined {
    if (this.robust === 'none') return undefined;
    return (x: Float64Array) => {
      predictPoints(this.model, this.data, this.full(x), this.pb, this.pred, this.errors);
      for (let i = 0; i < this.pb.count; i++) this.pb.weights[i] = this.baseWeights[i] * robustWeight(this.robust, this.errors[i], this.scale);
    };
  }
}

/** Positions in `active` of base rx, ry, rz, or null unless all three are there. */
export function baseRotationPositions(model: ArmModel, active: ArrayLike<number>): [number, number, number] | null {
  const pos: number[] = [];
  for (const f of ['rx', 'ry', 'rz'] as const) {
    const index = baseParam(model.n, f);
    let k = -1;
    for (let i = 0; i < active.length; i++) if (active[i] === index) k = i;
    if (k < 0) return null;
    pos.push(k);
  }
  return pos as [number, number, number];
}

/** The poses `idx` of pb (n joints each), in that order. */
export function subset(pb: PoseBuffers, n: number, idx: number[]): PoseBuffers {
  const m = idx.length;
  // Every pose in order (no hold-out, nothing excluded): share the read-only buffers; the weights are
  // copied because a robust fit rewrites them in place.
  if (m === pb.count && idx.every((i, k) => i === k)) return { ...pb, weights: Float64Array.from(pb.weights) };
  const out: PoseBuffers = {
    count: m, q: new Float64Array(m * n), cq: new Float64Array(m * n), sq: new Float64Array(m * n),
    measured: new Float64Array(m * 3), weights: new Float64Array(m),
  };
  for (let k = 0; k < m; k++) {
    const i = idx[k];
    for (let j = 0; j < n; j++) {
      out.q[k * n + j] = pb.q[i * n + j];
      out.cq[k * n + j] = pb.cq[i * n + j];
      out.sq[k * n + j] = pb.sq[i * n + j];
    }
    for (let c = 0; c < 3; c++) out.measured[3 * k + c] = pb.measured[3 * i + c];
    out.weights[k] = pb.weights[i];
  }
  return out;
}

/** Levenberg–Marquardt from v0 over the parameters `active`; v is the full vector at the solution. */
export function identifyParameters(
  model: ArmModel, data: ArmData, pb: PoseBuffers, v0: Float64Array, active: Int32Array, o: ResolvedFitOptions,
  onIteration?: (it: IterationInfo) => void,
  initial?: InitialNormalEquations,
) {
  const problem = new ArmLeastSquares(model, data, pb, active, v0, o.robust, o.robustScaleMm);
  const x0 = Float64Array.from(active, (j) => v0[j]);
  const count = pb.count;
  const result = levenbergMarquardt(problem, x0, {
    maxIterations: o.maxIterations,
    rmsOf: (c) => Math.sqrt((2 * c) / Math.max(count, 1)),
    degreesOfFreedom: 3 * count - active.length,
    onIteration,
    initial,
  });
  return { result, v: Float64Array.from(problem.full(result.x)) };
}

/** Joints whose readings span less than 0.5° (0.5 mm) over the fit poses. */
export function stillJoints(g: ArmGeometry, poses: SessionPose[], idx: number[]): string[] {
  return g.joints.filter((_, k) => {
    let lo = Infinity, hi = -Infinity;
    for (const i of idx) {
      lo = Math.min(lo, poses[i].q[k]);
      hi = Math.max(hi, poses[i].q[k]);
    }
    return hi - lo < 0.5;
  }).map((j) => j.name);
}

/** Start of the solver: the normal equations (over the active parameters) at v0 and the cost there. */
export interface InitialNormalEquations {
  A: Float64Array;
  g: Float64Array;
  cost: number;
}

export interface ParameterSelection {
  selection: IdentifiabilityResult;
  /** Indices into the full vector of the identifiable candidates. */
  active: Int32Array;
  /** The candidate block restricted to `active`, when the solver can start from it. */
  initial?: InitialNormalEquations;
}

/**
 * Identifiability selection over `candidates` from the normal equations at v0 on the poses pb
 * (`stills`: joints that barely move on them). The base orientation is solved as small rotations about
 * the measurement axes whenever all three of its angles are candidates (any mount: wall, ceiling), as
 * the file's angles otherwise; data.baseIncrements is left as the selected parameters need it.
 */
export function selectParameters(
  model: ArmModel, data: ArmData, v0: Float64Array, candidates: ParameterInfo[], geometry: ArmGeometry, pb: PoseBuffers, stills: string[],
): ParameterSelection {
  const pc = candidates.length;
  const candIdx = Int32Array.from(candidates, (c) => c.index);
  const candidateIncrements = baseRotationPositions(model, candIdx) !== null;
  data.baseIncrements = candidateIncrements;
  const Ac = new Float64Array(pc * pc), gc = new Float64Array(pc);
  const cost = accumulateNormalEquations(model, data, v0, pb, candIdx, Ac, gc, normalWork(pc));
  symmetrize(Ac, pc);
  const selection = selectIdentifiable(Ac, candidates, geometry, stills);
  const active = Int32Array.from(selection.identified, (c) => candidates[c].index);
  const increments = candidateIncrements && baseRotationPositions(model, active) !== null;
  // The candidate block is the solver's first step when both use the same base coordinates.
  const initial = increments === candidateIncrements
    ? { A: subMatrix(Ac, pc, selection.identified), g: Float64Array.from(selection.identified, (c) => gc[c]), cost }
    : undefined;
  data.baseIncrements = increments;
  return { selection, active, initial };
}
