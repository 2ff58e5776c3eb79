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
  DEG, candidateParameters, characteristicLength, fromReportUnit, readFrame, toReportUnit, vectorToGeometry, type ParameterInfo,
} from './parameters';
import { kabsch, transformToFrame } from './registration';
import { levenbergMarquardt, robustCurvature, robustWeight, type LeastSquaresProblem } from './lm';
import { observability, selectIdentifiable, subMatrix } from './identifiability';
import { sandwichCovariance, summariseCovariance, uncertainty } from './uncertainty';
import { incrementAngles, invert3, zyxRateMatrix } from './rotations';
import {
  DEFAULT_NOISE_MM, excitationWarnings, noiseWarning, parallelAxes, type FitWarning, type ParallelAxes,
} from './warnings';
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
  /** Instrument noise, mm per coordinate (1 σ), for the residual-spread warning. Default 0.05 (a tracker-like value, from memory). */
  noiseMm?: number;
  /** Add Hayati's β to links between parallel or nearly parallel revolute axes that list none. Default true. */
  autoBeta?: boolean;
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
  /** Links between parallel or nearly parallel axes where the engine added β (absent from the nominal file). */
  betaAdded: ParallelAxes[];
  /** Excitation and noise warnings (plain words, with advice); empty when nothing is wrong. */
  warnings: FitWarning[];
  /** What the standard errors mean (method, and that they are conditional on the parameters held at nominal). */
  uncertaintyNote: string;
  /**
   * Standard errors (deg) of the base orientation as small rotations about the measurement x, y, z axes
   * (the solver's coordinates: defined at every orientation). null when the base rotation was not identified.
   */
  baseRotationStandardErrors: [number, number, number] | null;
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
    noiseMm: o.noiseMm ?? DEFAULT_NOISE_MM,
    autoBeta: o.autoBeta ?? true,
  };
  const problems: InputProblem[] = [];
  const bad = (column: string, message: string, expected: string) => problems.push({ column, message, expected });
  if (!(r.holdout >= 0 && r.holdout <= 0.9)) bad('holdout', `hold-out fraction ${r.holdout} is out of range`, 'a number from 0 to 0.9');
  if (!Number.isInteger(r.seed)) bad('seed', `seed ${r.seed} is not an integer`, 'an integer');
  if (!(r.robustScaleMm > 0)) bad('robustScaleMm', `robust scale ${r.robustScaleMm} mm is not positive`, 'a positive length in mm');
  if (!(r.outlierThreshold > 0)) bad('outlierThreshold', `outlier threshold ${r.outlierThreshold} is not positive`, 'a positive number');
  if (!(Number.isInteger(r.kFold) && (r.kFold === 0 || r.kFold >= 2))) bad('kFold', `k-fold ${r.kFold} is not valid`, '0 (off) or an integer ≥ 2');
  if (!(Number.isInteger(r.maxIterations) && r.maxIterations >= 1)) bad('maxIterations', `iteration limit ${r.maxIterations} is not valid`, 'an integer ≥ 1');
  if (!(r.noiseMm > 0 && Number.isFinite(r.noiseMm))) bad('noiseMm', `instrument noise ${r.noiseMm} mm is not positive`, 'a positive length in mm');
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
  const b = model.layout.baseOffset;
  const pos: number[] = [];
  for (const f of [3, 4, 5]) {
    let k = -1;
    for (let i = 0; i < active.length; i++) if (active[i] === b + f) k = i;
    if (k < 0) return null;
    pos.push(k);
  }
  return pos as [number, number, number];
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

  // 0. Parallel and nearly parallel consecutive axes: the DH common normal is ill-defined there, so the
  // link gets Hayati's β (identified like a listed one; the calibrated file carries it).
  const parallel = parallelAxes(nominal);
  const betaAdded = o.autoBeta && o.groups.includes('beta') ? parallel.filter((pa) => nominal.joints[pa.jointIndex].beta === undefined) : [];
  const working: ArmGeometry = betaAdded.length
    ? { ...nominal, joints: nominal.joints.map((j, i) => (betaAdded.some((b) => b.jointIndex === i) ? { ...j, beta: 0 } : j)) }
    : nominal;

  const model = compileArm(working);
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
  const candIdx = Int32Array.from(candidates, (c) => c.index);
  // The base orientation is solved as small rotations about the measurement axes whenever all three of
  // its angles are candidates (any mount: wall, ceiling), as the file's angles otherwise.
  const candidateIncrements = baseRotationPositions(model, candIdx) !== null;
  const choose = (pb: PoseBuffers, stills: string[]) => {
    data.baseIncrements = candidateIncrements;
    const Ac = new Float64Array(pc * pc), gc = new Float64Array(pc);
    const cost = accumulateNormalEquations(model, data, v0, pb, candIdx, Ac, gc, normalWork(pc));
    symmetrize(Ac, pc);
    const selection = selectIdentifiable(Ac, candidates, working, stills);
    const active = Int32Array.from(selection.identified, (c) => candidates[c].index);
    const increments = candidateIncrements && baseRotationPositions(model, active) !== null;
    // The candidate block is the solver's first step when both use the same base coordinates.
    const initial = increments === candidateIncrements
      ? { A: subMatrix(Ac, pc, selection.identified), g: Float64Array.from(selection.identified, (c) => gc[c]), cost }
      : undefined;
    data.baseIncrements = increments;
    return { selection, active, initial };
  };
  const fitStill = stillJoints(working, poses, fitIdx);
  const { selection, active, initial } = choose(fitPb, fitStill);
  const identified = selection.identified.map((c) => candidates[c]);
  const p = identified.length;
  if (fitPb.count < p) {
    throw new EngineInputError([{
      column: 'pose',
      message: `${fitPb.count} fit poses are fewer than the ${p} identifiable parameters`,
      expected: `at least ${p} fit poses`,
    }]);
  }
  const increments = data.baseIncrements;
  const iterations: IterationInfo[] = [];
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
  let cov = unc.covariance;
  if (cov && o.robust !== 'none') cov = robustCovariance(model, data, v, fitPb, active, o.robust, o.robustScaleMm);
  // Standard errors of the base orientation about the measurement axes (the solver's coordinates), then
  // the covariance expressed in the file's angles: d(angles) = E⁻¹·ω (rotations.ts), where E is regular.
  const basePos = increments ? baseRotationPositions(model, active) : null;
  let baseRotationStandardErrors: [number, number, number] | null = null;
  let baseAnglesNote = '';
  let cal = cov;
  if (cov && basePos) {
    baseRotationStandardErrors = basePos.map((k) => Math.sqrt(cov![k * p + k]) / DEG) as [number, number, number];
    const b = model.layout.baseOffset;
    const Einv = invert3(zyxRateMatrix(v[b + 4], v[b + 5]), 1e-3);
    if (Einv) cal = transformBlock(cov, p, basePos, Einv);
    else {
      cal = null;
      baseAnglesNote = ' The base ry is within 0.06° of ±90° (a wall mount), where the file\'s angles rx and rz turn about the same axis: their standard errors are not defined, so the base orientation\'s standard errors are given about the measurement x, y, z axes instead.';
    }
  }
  const summary = cal ? summariseCovariance(cal, p) : cov ? summariseCovariance(cov, p) : { standardErrors: unc.standardErrors, correlation: unc.correlation, high: unc.high };
  const standardErrors = summary.standardErrors.map((se, k) => (!cal && cov && basePos?.includes(k) ? null : se));
  const obs = observability(A, identified, characteristicLength(working), fitPb.count, pc);
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
      const trainPb = subset(all, n, train);
      // The identifiability selection is repeated on the fold's training poses, so the held-out fold
      // has no say in which parameters are identified (otherwise the estimate is optimistic).
      const fold = choose(trainPb, stillJoints(working, poses, train));
      if (train.length < fold.active.length || test.length === 0) {
        throw new EngineInputError([{ column: 'kFold', message: `${o.kFold}-fold cross-validation leaves ${train.length} training poses in fold ${f + 1}, fewer than the ${fold.active.length} identifiable parameters`, expected: 'fewer folds or more poses' }]);
      }
      const fr = identifyParameters(model, data, trainPb, v0, fold.active, o, undefined, fold.initial);
      const testPb = subset(all, n, test);
      const pred = new Float64Array(3 * testPb.count), e = new Float64Array(testPb.count);
      predictPoints(model, data, fr.v, testPb, pred, e);
      foldStats.push(errorStats(e));
      for (const x of e) sum2 += x * x;
      count += e.length;
    }
    data.baseIncrements = increments;
    crossValidation = { k: o.kFold, rms: Math.sqrt(sum2 / count), folds: foldStats };
  }
  const validationMs = now() - tVal;

  // Report.
  const calibrated = vectorToGeometry(working, v);
  const idPos = new Map(identified.map((c, k) => [c.index, k]));
  const fixedReason = new Map(selection.fixed.map((f) => [f.fixed.info.index, f.fixed.reason]));
  const chosen = new Set(candidates.map((c) => c.index));
  const parameters: ParameterReport[] = model.layout.params
    .filter((info) => !(info.owner === 'joint' && info.name === 'beta' && !info.defaultIdentified))
    .map((info) => {
      const k = idPos.get(info.index);
      const se = k !== undefined ? standardErrors[k] : null;
      const nominalValue = toReportUnit(info, v0[info.index]);
      const nominalFile = info.owner === 'base' && !nominal.base ? 0 : nominalValue;
      const calValue = toReportUnit(info, v[info.index]);
      const report: ParameterReport = {
        key: info.key, name: info.name, group: info.group === 'tool-rotation' ? 'tool' : info.group, unit: info.unit,
        nominal: nominalFile, calibrated: calValue, change: calValue - nominalFile,
        standardError: se === null || se === undefined ? null : toReportUnit(info, se),
        status: k !== undefined ? 'identified' : 'fixed',
      };
      if (info.joint !== undefined) report.joint = info.joint;
      if (k === undefined) report.reason = reasonFor(info, chosen, fixedReason, nominal);
      return report;
    });
  const keys = identified.map((c) => c.key);
  const highCorrelations = summary.high.map((h) => ({ a: keys[h.a], b: keys[h.b], r: h.r }));
  const fixedCount = parameters.filter((x) => x.status === 'fixed').length;
  const uncertaintyNote = [
    o.robust === 'none'
      ? 'Standard errors are σ̂·√diag((JᵀJ)⁻¹) at the solution (linearised least squares, σ̂² = residual sum of squares / (m − p)).'
      : `Standard errors use the sandwich estimator H⁻¹BH⁻¹·m/(m − p) for the ${o.robust} loss (Huber 1967; HC1 factor of MacKinnon & White 1985), so down-weighted poses do not make them optimistic.`,
    `They are conditional on the ${fixedCount} parameter${fixedCount === 1 ? '' : 's'} held at nominal: those are treated as exactly known, and any error in them is not included.`,
    baseRotationStandardErrors ? 'The base orientation is solved as small rotations about the measurement axes and converted to the file\'s Z-Y-X angles for output.' : '',
  ].filter(Boolean).join(' ') + baseAnglesNote;

  // Warnings: excitation (how well the poses determine the parameters) and noise (how well the model fits).
  const L = characteristicLength(working);
  const warnings: FitWarning[] = [];
  for (const b of betaAdded) {
    warnings.push({
      code: 'beta-added', severity: 'info', subjects: [b.key],
      message: `${b.reason[0].toUpperCase()}${b.reason.slice(1)}: the nominal lists no β there, and the DH common normal of (nearly) parallel axes is ill-defined (Hayati's rule).`,
      advice: `The calibrated file carries ${b.key}; list "beta": 0 for ${nominal.joints[b.jointIndex].name} in the nominal to make this explicit.`,
    });
  }
  if (!result.converged) {
    warnings.push({ code: 'not-converged', severity: 'serious', message: `The solver did not converge: ${result.stopReason}.`, advice: 'Do not use this result. Check the nominal geometry and the session, or raise the iteration limit.' });
  }
  const noise = noiseWarning(unc.sigma, o.noiseMm, options.noiseMm !== undefined, parallel, (key) => {
    const info = model.layout.byKey.get(key);
    return info !== undefined && idPos.has(info.index);
  });
  if (noise) warnings.push(noise);
  warnings.push(...excitationWarnings({
    geometry: working,
    q: fitIdx.map((i) => poses[i].q),
    conditionNumber: obs.conditionNumber,
    parameters: parameters.filter((x) => x.status === 'identified'),
    highCorrelations,
    characteristicLength: L,
    noiseMm: o.noiseMm,
  }));

  const report: FitReport = {
    engineVersion: ENGINE_VERSION,
    convention: nominal.convention,
    options: o,
    nominal,
    calibrated,
    parameters,
    correlation: { keys, matrix: summary.correlation },
    highCorrelations,
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
    betaAdded,
    warnings,
    uncertaintyNote,
    baseRotationStandardErrors,
    timing: { totalMs: 0, registrationMs, identificationMs, uncertaintyMs, validationMs },
  };
  report.timing.totalMs = now() - tStart;
  return report;
}

/** T·Cov·Tᵀ where T is the identity except the 3×3 block M on the positions `pos`. */
function transformBlock(cov: Float64Array, p: number, pos: [number, number, number], M: Float64Array): Float64Array {
  const T = new Float64Array(p * p);
  for (let i = 0; i < p; i++) T[i * p + i] = 1;
  for (let r = 0; r < 3; r++) for (let c = 0; c < 3; c++) T[pos[r] * p + pos[c]] = M[3 * r + c];
  const TC = new Float64Array(p * p), out = new Float64Array(p * p);
  for (let a = 0; a < p; a++) for (let b = 0; b < p; b++) {
    let s = 0;
    for (let k = 0; k < p; k++) s += T[a * p + k] * cov[k * p + b];
    TC[a * p + b] = s;
  }
  for (let a = 0; a < p; a++) for (let b = 0; b < p; b++) {
    let s = 0;
    for (let k = 0; k < p; k++) s += TC[a * p + k] * T[b * p + k];
    out[a * p + b] = s;
  }
  return out;
}

/**
 * Sandwich covariance (uncertainty.ts, sandwichCovariance) of a robust fit at the solution v: one pass
 * over the fit poses accumulating the bread H = Σ J_iᵀ ∇²ρ(r_i) J_i and the meat B = Σ (J_iᵀψ_i)(J_iᵀψ_i)ᵀ.
 * Pose weights from the session (before the robust reweighting) multiply both.
 */
function robustCovariance(
  model: ArmModel, data: ArmData, v: Float64Array, pb: PoseBuffers, active: Int32Array,
  robust: 'huber' | 'cauchy', k: number,
): Float64Array | null {
  const p = active.length, n = model.n;
  const H = new Float64Array(p * p), B = new Float64Array(p * p);
  const J = new Float64Array(3 * p), s = new Float64Array(p), hJ = new Float64Array(3 * p);
  setParameters(model, data, v);
  const pt = data.point, meas = pb.measured;
  let m = 0;
  for (let i = 0; i < pb.count; i++) {
    forwardKinematics(model, data, pb.q, i * n, true, undefined, pb.cq, pb.sq);
    const rx = pt[0] - meas[3 * i], ry = pt[1] - meas[3 * i + 1], rz = pt[2] - meas[3 * i + 2];
    const e = Math.hypot(rx, ry, rz);
    const w = robustWeight(robust, e, k);
    // The session's own weight: the robust reweighting has multiplied it into pb.weights, so divide it out.
    const base = w > 0 ? pb.weights[i] / w : 0;
    if (!(base > 0)) continue;
    m += 3;
    const c2 = robustCurvature(robust, e, k);
    const ux = e > 0 ? rx / e : 0, uy = e > 0 ? ry / e : 0, uz = e > 0 ? rz / e : 0;
    pointJacobian(model, data, active, J);
    // ψ = w·r; ∇²ρ = w·I + (ρ'' − w)·uuᵀ.
    for (let a = 0; a < p; a++) {
      const jx = J[3 * a], jy = J[3 * a + 1], jz = J[3 * a + 2];
      s[a] = base * w * (jx * rx + jy * ry + jz * rz);
      const ju = jx * ux + jy * uy + jz * uz;
      const t = (c2 - w) * ju;
      hJ[3 * a] = w * jx + t * ux; hJ[3 * a + 1] = w * jy + t * uy; hJ[3 * a + 2] = w * jz + t * uz;
    }
    for (let a = 0; a < p; a++) {
      const sa = s[a];
      const hx = hJ[3 * a], hy = hJ[3 * a + 1], hz = hJ[3 * a + 2];
      for (let b = a; b < p; b++) {
        B[a * p + b] += sa * s[b];
        H[a * p + b] += base * (hx * J[3 * b] + hy * J[3 * b + 1] + hz * J[3 * b + 2]);
      }
    }
  }
  symmetrize(H, p);
  symmetrize(B, p);
  return sandwichCovariance(H, B, p, m);
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
