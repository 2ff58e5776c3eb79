/**
 * Fit orchestration: registration → identifiability → Levenberg–Marquardt → uncertainty → validation.
 *
 * Residuals are predicted − measured inside the solver; reports show measured − predicted (mm).
 * "Before" means the nominal geometry with the registered base (the tracker frame has to be registered
 * before any comparison is meaningful); "after" the calibrated geometry.
 */
import type { ArmGeometry, Convention, ErrorStats, FrameSpec, ParameterGroup, SessionPose } from './types';
import { EngineInputError, PARAMETER_GROUPS, type InputProblem } from './types';
import { compileArm, createArmData, forwardKinematics, setParameters, type ArmData, type ArmModel } from './kinematics';
import {
  accumulateNormalEquations, normalWork, pointJacobian, poseBuffers, predictPoints, symmetrize, type NormalWork, type PoseBuffers,
} from './jacobian';
import {
  candidateParameters, characteristicLength, fromReportUnit, readFrame, toReportUnit, vectorToGeometry, type ParameterInfo,
} from './parameters';
import { kabsch, transformToFrame } from './registration';
import { levenbergMarquardt, robustWeight, type LeastSquaresProblem } from './lm';
import { observability, selectIdentifiable, subMatrix } from './identifiability';
import { uncertainty } from './uncertainty';
import { errorStats } from './stats';
import { assignRoles, kFoldAssignment, leverageFactor, standardisedResidual, type PoseRole } from './validation';

export const ENGINE_VERSION = '1.0.0';

export interface FitOptions {
  /** Parameter groups to identify. Default: all of PARAMETER_GROUPS (beta only for joints listing a beta key). */
  groups?: ParameterGroup[];
  /** Fraction 0..0.9 of pose labels held out when no split column is used. Default 0. */
  holdout?: number;
  /** Seed of the hold-out draw and the k-fold partition. Default 1. */
  seed?: number;
  /** Poses with split 'validate' are held out. Default true. */
  useSplitColumn?: boolean;
  /** Robust loss. Default 'none'. */
  robust?: 'none' | 'huber' | 'cauchy';
  /** Scale of the robust loss, mm of 3-D error. Default 0.05. */
  robustScaleMm?: number;
  /** Standardised residual above which a pose is flagged. Default 3. */
  outlierThreshold?: number;
  /** Pose labels to exclude (all visits of the label) or "line:N" for one row. Default none. */
  exclude?: string[];
  /** k of k-fold cross-validation; 0 = off. Default 0. */
  kFold?: number;
  /** Levenberg–Marquardt iteration limit. Default 50. */
  maxIterations?: number;
  /** Progress callback (job runner). */
  onIteration?: (it: IterationInfo) => void;
}

export type ResolvedFitOptions = Required<Omit<FitOptions, 'onIteration'>>;

export interface IterationInfo {
  iteration: number;
  cost: number;
  rmsMm: number;
  lambda: number;
  stepNorm: number;
}

export interface ParameterReport {
  key: string;
  joint?: string;
  name: string;
  group: ParameterGroup;
  unit: 'mm' | 'deg';
  nominal: number;
  calibrated: number;
  change: number;
  standardError: number | null;
  status: 'identified' | 'fixed';
  reason?: string;
}

export interface PoseResidual {
  label: string;
  line: number;
  role: PoseRole;
  /** measured − predicted, mm. */
  before: [number, number, number];
  after: [number, number, number];
  errorBefore: number;
  errorAfter: number;
  standardised: number | null;
  outlier: boolean;
}

export interface FitReport {
  engineVersion: string;
  convention: Convention;
  options: ResolvedFitOptions;
  nominal: ArmGeometry;
  calibrated: ArmGeometry;
  parameters: ParameterReport[];
  correlation: { keys: string[]; matrix: number[][] };
  highCorrelations: { a: string; b: string; r: number }[];
  observability: {
    conditionNumber: number; O1: number; O3: number; O4: number;
    singularValues: number[]; rank: number; parameterCount: number;
  };
  iterations: IterationInfo[];
  stopReason: string;
  converged: boolean;
  statistics: {
    fit: { before: ErrorStats; after: ErrorStats };
    holdout: { before: ErrorStats; after: ErrorStats } | null;
    crossValidation: { k: number; rms: number; folds: ErrorStats[] } | null;
  };
  poses: PoseResidual[];
  /** Flagged fit and hold-out poses (already excluded ones keep their flag in `poses` only): label, or line:N when the label repeats. */
  outliers: string[];
  residualSigmaMm: number;
  /** How the base was obtained: from the nominal file, or registered (Kabsch) because the file had none. */
  registration: { registered: boolean; rmsMm: number | null };
  timing: { totalMs: number; registrationMs: number; identificationMs: number; uncertaintyMs: number; validationMs: number };
}

export interface CheckReport {
  stats: ErrorStats;
  poses: { label: string; line: number; error: number; residual: [number, number, number] }[];
  registered: boolean;
  base: FrameSpec;
}

const now = () => performance.now();

export function resolveFitOptions(o: FitOptions = {}): ResolvedFitOptions {
  const r: ResolvedFitOptions = {
    groups: o.groups ? [...o.groups] : [...PARAMETER_GROUPS],
    holdout: o.holdout ?? 0,
    seed: o.seed ?? 1,
    useSplitColumn: o.useSplitColumn ?? true,
    robust: o.robust ?? 'none',
    robustScaleMm: o.robustScaleMm ?? 0.05,
    outlierThreshold: o.outlierThreshold ?? 3,
    exclude: o.exclude ? [...o.exclude] : [],
    kFold: o.kFold ?? 0,
    maxIterations: o.maxIterations ?? 50,
  };
  const problems: InputProblem[] = [];
  const bad = (column: string, message: string, expected: string) => problems.push({ column, message, expected });
  if (!(r.holdout >= 0 && r.holdout <= 0.9)) bad('holdout', `hold-out fraction ${r.holdout} is out of range`, 'a number from 0 to 0.9');
  if (!Number.isInteger(r.seed)) bad('seed', `seed ${r.seed} is not an integer`, 'an integer');
  if (!(r.robustScaleMm > 0)) bad('robustScaleMm', `robust scale ${r.robustScaleMm} mm is not positive`, 'a positive length in mm');
  if (!(r.outlierThreshold > 0)) bad('outlierThreshold', `outlier threshold ${r.outlierThreshold} is not positive`, 'a positive number');
  if (!(Number.isInteger(r.kFold) && (r.kFold === 0 || r.kFold >= 2))) bad('kFold', `k-fold ${r.kFold} is not valid`, '0 (off) or an integer ≥ 2');
  if (!(Number.isInteger(r.maxIterations) && r.maxIterations >= 1)) bad('maxIterations', `iteration limit ${r.maxIterations} is not valid`, 'an integer ≥ 1');
  if (!['none', 'huber', 'cauchy'].includes(r.robust)) bad('robust', `unknown robust loss "${r.robust}"`, 'none, huber or cauchy');
  for (const g of r.groups) if (!(PARAMETER_GROUPS as readonly string[]).includes(g)) bad('groups', `unknown parameter group "${g}"`, PARAMETER_GROUPS.join(', '));
  if (problems.length) throw new EngineInputError(problems);
  return r;
}

/** Check the geometry and the poses agree (joint count, finite numbers); throws EngineInputError. */
export function checkInputs(geometry: ArmGeometry, poses: SessionPose[]): void {
  const problems: InputProblem[] = [];
  if (geometry.convention !== 'dh' && geometry.convention !== 'mdh') {
    problems.push({ column: 'convention', message: `unknown convention "${String(geometry.convention)}"`, expected: '"dh" or "mdh"' });
  }
  if (!Array.isArray(geometry.joints) || geometry.joints.length === 0) problems.push({ column: 'joints', message: 'the geometry has no joints', expected: 'at least one joint' });
  const n = geometry.joints?.length ?? 0;
  for (const p of poses) {
    if (problems.length >= 20) break;
    if (p.q.length !== n) {
      problems.push({ line: p.line, column: 'q', message: `pose "${p.label}" has ${p.q.length} joint values but the geometry has ${n} joints`, expected: `${n} joint values` });
      continue;
    }
    for (let k = 0; k < n; k++) {
      const v = p.q[k];
      if (!Number.isFinite(v)) problems.push({ line: p.line, column: `q${k + 1}`, message: `joint value ${v} is not a finite number`, expected: 'a number' });
    }
    if (!(Number.isFinite(p.x) && Number.isFinite(p.y) && Number.isFinite(p.z))) {
      for (const c of ['x', 'y', 'z'] as const) {
        if (!Number.isFinite(p[c])) problems.push({ line: p.line, column: c, message: `measured ${c} ${p[c]} is not a finite number`, expected: 'a number in mm' });
      }
    }
  }
  if (problems.length) throw new EngineInputError(problems);
}

/** Base frame registered by Kabsch from the nominal points (identity base) to the measured points. */
export function registerBase(model: ArmModel, data: ArmData, v: Float64Array, pb: PoseBuffers): { base: FrameSpec; rms: number } {
  const w = Float64Array.from(v);
  const b = model.layout.baseOffset;
  w.fill(0, b, b + 6);
  const pred = new Float64Array(3 * pb.count);
  predictPoints(model, data, w, pb, pred);
  const T = kabsch(pred, pb.measured);
  return { base: transformToFrame(T), rms: T.rms };
}

export function writeBase(model: ArmModel, v: Float64Array, base: FrameSpec): void {
  const b = model.layout.baseOffset;
  const info = model.layout.params;
  (['x', 'y', 'z', 'rx', 'ry', 'rz'] as const).forEach((f, k) => (v[b + k] = fromReportUnit(info[b + k], base[f])));
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
  get reweight(): ((x: Float64Array) => void) | undefined {
    if (this.robust === 'none') return undefined;
    return (x: Float64Array) => {
      predictPoints(this.model, this.data, this.full(x), this.pb, this.pred, this.errors);
      for (let i = 0; i < this.pb.count; i++) this.pb.weights[i] = this.baseWeights[i] * robustWeight(this.robust, this.errors[i], this.scale);
    };
  }
}

function subset(pb: PoseBuffers, n: number, idx: number[]): PoseBuffers {
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

export function identifyParameters(
  model: ArmModel, data: ArmData, pb: PoseBuffers, v0: Float64Array, active: Int32Array, o: ResolvedFitOptions,
  onIteration?: (it: IterationInfo) => void,
  initial?: { A: Float64Array; g: Float64Array; cost: number },
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
function stillJoints(g: ArmGeometry, poses: SessionPose[], idx: number[]): string[] {
  return g.joints.filter((_, k) => {
    let lo = Infinity, hi = -Infinity;
    for (const i of idx) {
      lo = Math.min(lo, poses[i].q[k]);
      hi = Math.max(hi, poses[i].q[k]);
    }
    return hi - lo < 0.5;
  }).map((j) => j.name);
}

/** Flagged fit and hold-out poses: the label, or line:N when the label repeats (label counts only when some pose is flagged). */
function outlierNames(poses: SessionPose[], reports: PoseResidual[], roles: PoseRole[]): string[] {
  const flagged = poses.filter((_, i) => reports[i].outlier && roles[i] !== 'excluded');
  if (flagged.length === 0) return [];
  const counts = new Map<string, number>();
  for (const p of poses) counts.set(p.label, (counts.get(p.label) ?? 0) + 1);
  return flagged.map((p) => (counts.get(p.label) === 1 ? p.label : `line:${p.line}`));
}

export function fitSession(nominal: ArmGeometry, poses: SessionPose[], options: FitOptions = {}): FitReport {
  const tStart = now();
  const o = resolveFitOptions(options);
  checkInputs(nominal, poses);
  const roles = assignRoles(poses, o);
  const fitIdx: number[] = [], holdIdx: number[] = [];
  roles.forEach((r, i) => (r === 'fit' ? fitIdx : r === 'holdout' ? holdIdx : null)?.push(i));

  const model = compileArm(nominal);
  const data = createArmData(model);
  const n = model.n;
  const all = poseBuffers(model, poses);
  const fitPb = subset(all, n, fitIdx);
  if (fitPb.count < 3) {
    throw new EngineInputError([{ message: `only ${fitPb.count} poses are left for the fit`, expected: 'at least as many fit poses as identifiable parameters' }]);
  }

  // 1. Registration of the measurement frame (only when the nominal has no base).
  const tReg = now();
  const v0 = Float64Array.from(model.nominal);
  let registrationRms: number | null = null;
  if (!nominal.base) {
    const reg = registerBase(model, data, v0, fitPb);
    writeBase(model, v0, reg.base);
    registrationRms = reg.rms;
  }
  const registrationMs = now() - tReg;

  // 2. Identifiability at the start point, then 3. identification.
  const tId = now();
  const candidates = candidateParameters(model.layout, o.groups);
  const pc = candidates.length;
  const Ac = new Float64Array(pc * pc), gc = new Float64Array(pc);
  const candIdx = Int32Array.from(candidates, (c) => c.index);
  const cost0 = accumulateNormalEquations(model, data, v0, fitPb, candIdx, Ac, gc, normalWork(pc));
  symmetrize(Ac, pc);
  const selection = selectIdentifiable(Ac, candidates, nominal, stillJoints(nominal, poses, fitIdx));
  const identified = selection.identified.map((c) => candidates[c]);
  const p = identified.length;
  if (fitPb.count < p) {
    throw new EngineInputError([{
      column: 'pose',
      message: `${fitPb.count} fit poses are fewer than the ${p} identifiable parameters`,
      expected: `at least ${p} fit poses`,
    }]);
  }
  const active = Int32Array.from(identified, (c) => c.index);
  const iterations: IterationInfo[] = [];
  // The identified block of the candidate normal equations is the solver's first step (same start point).
  const initial = { A: subMatrix(Ac, pc, selection.identified), g: Float64Array.from(selection.identified, (c) => gc[c]), cost: cost0 };
  const { result, v } = identifyParameters(model, data, fitPb, v0, active, o, (it) => {
    iterations.push(it);
    options.onIteration?.(it);
  }, initial);
  const identificationMs = now() - tId;

  // 4. Uncertainty and observability at the solution.
  const tUnc = now();
  // The solver's last normal equations are those at the solution (it returns them with x).
  const A = result.A;
  const J = new Float64Array(3 * p);
  const m = 3 * fitPb.count;
  const unc = uncertainty(A, p, 2 * result.cost, m);
  const obs = observability(A, identified, characteristicLength(nominal), fitPb.count, pc);
  const uncertaintyMs = now() - tUnc;

  // 5. Validation: residuals before/after, standardised residuals, cross-validation.
  const tVal = now();
  const before = new Float64Array(3 * all.count), after = new Float64Array(3 * all.count);
  const errBefore = new Float64Array(all.count), errAfter = new Float64Array(all.count);
  predictPoints(model, data, v0, all, before, errBefore);
  const lev = unc.covariance ? leverageFactor(A, p) : null;
  // Standardised residuals (NaN = none). With a leverage factor, one pass at the solution gives both the
  // predicted point and its Jacobian, so the calibrated points need no separate prediction pass.
  const standardised = new Float64Array(all.count).fill(NaN);
  if (lev) {
    setParameters(model, data, v);
    const tmp = new Float64Array(3 * p);
    const e = new Float64Array(3);
    const fk = forwardKinematics, jac = pointJacobian, studentise = standardisedResidual;
    const pt = data.point, mm = all.measured;
    for (let i = 0; i < all.count; i++) {
      fk(model, data, all.q, i * n, true, undefined, all.cq, all.sq);
      const px = pt[0], py = pt[1], pz = pt[2];
      after[3 * i] = px; after[3 * i + 1] = py; after[3 * i + 2] = pz;
      e[0] = mm[3 * i] - px; e[1] = mm[3 * i + 1] - py; e[2] = mm[3 * i + 2] - pz;
      errAfter[i] = Math.hypot(e[0], e[1], e[2]);
      jac(model, data, active, J);
      // Robust weights scale a fit pose's information; the studentisation uses the unweighted residual.
      const s = studentise(e, J, lev, p, unc.sigma, roles[i] === 'fit' ? -1 : 1, tmp);
      if (s !== null) standardised[i] = s;
    }
  } else {
    predictPoints(model, data, v, all, after, errAfter);
  }
  const threshold = o.outlierThreshold;
  const meas = all.measured;
  const poseReports: PoseResidual[] = new Array(all.count);
  for (let i = 0; i < all.count; i++) {
    const pose = poses[i];
    const x = meas[3 * i], y = meas[3 * i + 1], z = meas[3 * i + 2];
    const si = standardised[i];
    const s = si === si ? si : null;
    poseReports[i] = {
      label: pose.label, line: pose.line, role: roles[i],
      before: [x - before[3 * i], y - before[3 * i + 1], z - before[3 * i + 2]],
      after: [x - after[3 * i], y - after[3 * i + 1], z - after[3 * i + 2]],
      errorBefore: errBefore[i], errorAfter: errAfter[i], standardised: s, outlier: s !== null && s > threshold,
    };
  }
  const pick = (idx: number[], e: Float64Array) => errorStats(idx.map((i) => e[i]));
  let crossValidation: FitReport['statistics']['crossValidation'] = null;
  if (o.kFold >= 2) {
    const folds = kFoldAssignment(fitIdx.map((i) => poses[i].label), o.kFold, o.seed);
    const foldStats: ErrorStats[] = [];
    let sum2 = 0, count = 0;
    for (let f = 0; f < o.kFold; f++) {
      const train = fitIdx.filter((_, k) => folds[k] !== f);
      const test = fitIdx.filter((_, k) => folds[k] === f);
      if (train.length < p || test.length === 0) {
        throw new EngineInputError([{ column: 'kFold', message: `${o.kFold}-fold cross-validation leaves ${train.length} training poses in fold ${f + 1}, fewer than the ${p} identified parameters`, expected: 'fewer folds or more poses' }]);
      }
      const fr = identifyParameters(model, data, subset(all, n, train), v0, active, o);
      const testPb = subset(all, n, test);
      const pred = new Float64Array(3 * testPb.count), e = new Float64Array(testPb.count);
      predictPoints(model, data, fr.v, testPb, pred, e);
      foldStats.push(errorStats(e));
      for (const x of e) sum2 += x * x;
      count += e.length;
    }
    crossValidation = { k: o.kFold, rms: Math.sqrt(sum2 / count), folds: foldStats };
  }
  const validationMs = now() - tVal;

  // Report.
  const calibrated = vectorToGeometry(nominal, v);
  const idPos = new Map(identified.map((c, k) => [c.index, k]));
  const fixedReason = new Map(selection.fixed.map((f) => [f.fixed.info.index, f.fixed.reason]));
  const chosen = new Set(candidates.map((c) => c.index));
  const parameters: ParameterReport[] = model.layout.params
    .filter((info) => !(info.owner === 'joint' && info.name === 'beta' && !info.defaultIdentified))
    .map((info) => {
      const k = idPos.get(info.index);
      const se = k !== undefined ? unc.standardErrors[k] : null;
      const nominalValue = toReportUnit(info, v0[info.index]);
      const nominalFile = info.owner === 'base' && !nominal.base ? 0 : nominalValue;
      const cal = toReportUnit(info, v[info.index]);
      const report: ParameterReport = {
        key: info.key, name: info.name, group: info.group === 'tool-rotation' ? 'tool' : info.group, unit: info.unit,
        nominal: nominalFile, calibrated: cal, change: cal - nominalFile,
        standardError: se === null || se === undefined ? null : toReportUnit(info, se),
        status: k !== undefined ? 'identified' : 'fixed',
      };
      if (info.joint !== undefined) report.joint = info.joint;
      if (k === undefined) report.reason = reasonFor(info, chosen, fixedReason, nominal);
      return report;
    });
  const keys = identified.map((c) => c.key);
  const report: FitReport = {
    engineVersion: ENGINE_VERSION,
    convention: nominal.convention,
    options: o,
    nominal,
    calibrated,
    parameters,
    correlation: { keys, matrix: unc.correlation },
    highCorrelations: unc.high.map((h) => ({ a: keys[h.a], b: keys[h.b], r: h.r })),
    observability: obs,
    iterations,
    stopReason: result.stopReason,
    converged: result.converged,
    statistics: {
      fit: { before: pick(fitIdx, errBefore), after: pick(fitIdx, errAfter) },
      holdout: holdIdx.length ? { before: pick(holdIdx, errBefore), after: pick(holdIdx, errAfter) } : null,
      crossValidation,
    },
    poses: poseReports,
    outliers: outlierNames(poses, poseReports, roles),
    residualSigmaMm: unc.sigma,
    registration: { registered: !nominal.base, rmsMm: registrationRms },
    timing: { totalMs: 0, registrationMs, identificationMs, uncertaintyMs, validationMs },
  };
  report.timing.totalMs = now() - tStart;
  return report;
}

function reasonFor(info: ParameterInfo, chosen: Set<number>, fixed: Map<number, string>, g: ArmGeometry): string {
  if (info.group === 'tool-rotation') return 'the tool rotation does not move the measured point (only positions are measured)';
  const r = fixed.get(info.index);
  if (r) return r;
  if (!chosen.has(info.index)) return info.owner === 'base' && !g.base ? 'not in the chosen parameter groups (kept at the registered base)' : 'not in the chosen parameter groups';
  return 'kept at nominal';
}

/**
 * Error statistics of a geometry against a session, without fitting. When the geometry has no base,
 * the measurement frame is registered first (Kabsch), so the check is meaningful.
 */
export function checkGeometry(geometry: ArmGeometry, poses: SessionPose[]): CheckReport {
  checkInputs(geometry, poses);
  const model = compileArm(geometry);
  const data = createArmData(model);
  const pb = poseBuffers(model, poses);
  const v = Float64Array.from(model.nominal);
  let registered = false;
  if (!geometry.base) {
    writeBase(model, v, registerBase(model, data, v, pb).base);
    registered = true;
  }
  const pred = new Float64Array(3 * pb.count), e = new Float64Array(pb.count);
  predictPoints(model, data, v, pb, pred, e);
  return {
    stats: errorStats(e),
    poses: poses.map((p, i) => ({
      label: p.label, line: p.line, error: e[i],
      residual: [pb.measured[3 * i] - pred[3 * i], pb.measured[3 * i + 1] - pred[3 * i + 1], pb.measured[3 * i + 2] - pred[3 * i + 2]],
    })),
    registered,
    base: readFrame(v, model.layout.baseOffset),
  };
}
