/**
 * Compensation of a robot program for a unit's calibrated geometry against its model's nominal one.
 *
 * Controllers that keep the nominal model reach a joint configuration q by being sent the target the
 * nominal model puts at q. So for each target: solve the calibrated arm's inverse kinematics (joint
 * values that bring the real arm onto the target), then write the nominal forward kinematics at those
 * joint values as the compensated target.
 *   Cartesian program: target = x,y,z[,rx,ry,rz] (base or measurement frame), optional q hints.
 *     Position-only targets with a hint keep the orientation the calibrated arm has at the hint;
 *     without a hint the orientation is left free (smallest joint motion from the seed).
 *   Joint program: the intended pose is the nominal forward kinematics of each row (robot base frame);
 *     the calibrated joint values closest to the given ones reach it.
 * Seeds: the target's hint, else the previous target's solution (programs are continuous paths); the
 * first target without a hint is seeded by a few seeded starts within the limits.
 * Frames: "base" = the robot base frame (each geometry's chain without its base); "measurement" = the
 * tracker frame of the calibration (the calibrated geometry's base). Output is always in the robot base
 * frame. Tool: each geometry's own tool unless one is given (flange frame; same for both).
 */
import type { ArmGeometry, FrameSpec, InputProblem } from './types';
import { EngineInputError } from './types';
import { IkSolver, type IkOptions, type IkTarget } from './ik';
import type { IkResult, IkStatus } from './ik-status';
import { anglesFromRotation, rotationFromAngles } from './rotations';
import type { CompensatedRow, ParsedProgram } from './program-csv';
import { seededRandom } from './random';

export type ProgramFrame = 'base' | 'measurement';

export interface CompensateOptions {
  /** Frame of the targets. Default "base". */
  frame?: ProgramFrame;
  /** Tool centre point in the flange frame (mm, deg), replacing both geometries' tools. */
  tool?: FrameSpec;
  ik?: IkOptions;
  /** Called every `progressEvery` targets with the count done (for jobs). */
  onProgress?: (done: number, total: number) => void;
  progressEvery?: number;
}

export interface CompensatedTarget extends CompensatedRow {
  line: number;
  /** Size of the correction: distance between the compensated and the original target (mm). */
  correction: number;
  /** The correction as a vector: compensated − original target position (mm, robot base frame). */
  correctionVector: [number, number, number];
  /** Angle between the compensated and the original orientation (deg). */
  rotationCorrection: number;
  positionError: number;
  orientationError: number;
  smallestSingularValue: number;
}

export interface CompensationResult {
  kind: ParsedProgram['kind'];
  frame: ProgramFrame;
  targets: CompensatedTarget[];
  counts: Record<IkStatus, number>;
  /** Largest and RMS correction over targets whose status is not unreachable / outside-limits (mm). */
  maxCorrection: number;
  rmsCorrection: number;
  milliseconds: number;
}

function checkPair(calibrated: ArmGeometry, nominal: ArmGeometry, frame: ProgramFrame): void {
  const problems: InputProblem[] = [];
  if (calibrated.joints.length !== nominal.joints.length) {
    problems.push({ message: `the calibrated geometry has ${calibrated.joints.length} joints, the nominal ${nominal.joints.length}`, expected: 'the same arm model' });
  } else {
    calibrated.joints.forEach((j, i) => {
      if (j.type !== nominal.joints[i].type) problems.push({ column: `joints[${i}].type`, message: `joint ${j.name} is ${j.type} in the calibrated geometry and ${nominal.joints[i].type} in the nominal`, expected: 'the same arm model' });
    });
  }
  if (calibrated.convention !== nominal.convention) {
    problems.push({ column: 'convention', message: `conventions differ (${calibrated.convention} vs ${nominal.convention})`, expected: 'the same arm model' });
  }
  if (frame === 'measurement' && !calibrated.base) {
    problems.push({ column: 'base', message: 'the calibrated geometry has no base frame, so targets in the measurement frame cannot be placed', expected: 'a calibrated geometry from a fit (with base) or --frame base' });
  }
  if (problems.length) throw new EngineInputError(problems);
}

/** Rotation angle (deg) between two row-major rotations: ‖A − B‖_F = 2√2·sin(θ/2), well conditioned near 0. */
function angleBetween(A: ArrayLike<number>, B: ArrayLike<number>): number {
  let s = 0;
  for (let k = 0; k < 9; k++) s += (A[k] - B[k]) ** 2;
  return (2 * Math.asin(Math.min(1, Math.sqrt(s) / (2 * Math.SQRT2))) * 180) / Math.PI;
}

export function compensateProgram(calibrated: ArmGeometry, nominal: ArmGeometry, program: ParsedProgram, options: CompensateOptions = {}): CompensationResult {
  const steps = compensationSteps(calibrated, nominal, program, options);
  for (;;) {
    const r = steps.next();
    if (r.done) return r.value;
  }
}

/**
 * The same, giving the event loop back every `progressEvery` targets (default 500: a few milliseconds),
 * so a job in an app process never holds requests up for the whole program.
 */
export async function compensateProgramAsync(calibrated: ArmGeometry, nominal: ArmGeometry, program: ParsedProgram, options: CompensateOptions = {}): Promise<CompensationResult> {
  const steps = compensationSteps(calibrated, nominal, program, options);
  for (;;) {
    const r = steps.next();
    if (r.done) return r.value;
    await new Promise((done) => setImmediate(done));
  }
}

/** The compensation loop; yields the count of targets done every `progressEvery` targets. */
export function* compensationSteps(calibrated: ArmGeometry, nominal: ArmGeometry, program: ParsedProgram, options: CompensateOptions = {}): Generator<number, CompensationResult> {
  const t0 = performance.now();
  const frame = options.frame ?? 'base';
  checkPair(calibrated, nominal, frame);
  const cal: ArmGeometry = { ...calibrated, base: frame === 'measurement' ? calibrated.base : undefined, tool: options.tool ?? calibrated.tool };
  const nom: ArmGeometry = { ...nominal, base: undefined, tool: options.tool ?? nominal.tool };
  const calIk = new IkSolver(cal, options.ik);
  // Nominal poses only need forward kinematics; the solver's pose() gives the tool frame.
  const nomIk = new IkSolver(nom, options.ik);
  const n = cal.joints.length;
  const counts: Record<IkStatus, number> = { reached: 0, unreachable: 0, 'outside-limits': 0, singular: 0, jump: 0 };
  const out: CompensatedTarget[] = [];
  let previous: number[] | undefined;
  let previousHint: number[] | undefined;
  const every = options.progressEvery ?? 500;
  const total = program.targets.length;
  const middle = cal.joints.map((j) => (j.min !== undefined && j.max !== undefined ? (j.min + j.max) / 2 : 0));
  for (let k = 0; k < total; k++) {
    const t = program.targets[k];
    let target: IkTarget;
    let original: { position: ArrayLike<number>; rotation: Float64Array };
    if (program.kind === 'joint') {
      const p = nomIk.pose(t.q!);
      target = { position: p.position, rotation: p.rotation };
      original = p;
    } else {
      const pose = t.pose!;
      let rotation: Float64Array | undefined;
      if (program.orientation) rotation = rotationFromAngles(pose.rx!, pose.ry!, pose.rz!);
      else if (t.q) rotation = calIk.pose(t.q).rotation;
      target = { position: [pose.x, pose.y, pose.z], rotation };
      original = { position: target.position, rotation: rotation ?? new Float64Array(0) };
    }
    const hint = t.q;
    const seedQ = hint ?? previous ?? middle;
    const intendedChange = hint && previousHint ? hint.map((v, i) => v - previousHint![i]) : undefined;
    let r: IkResult = calIk.solve(target, { q: seedQ, previous, intendedChange });
    if (!hint && !previous && (r.status === 'unreachable' || r.status === 'outside-limits')) {
      // First target without a hint: try seeded starts within the limits, keep the closest.
      const random = seededRandom(k + 1);
      for (let s = 0; s < 24; s++) {
        const q0 = cal.joints.map((j) => {
          const lo = j.min ?? -180, hi = j.max ?? 180;
          return lo + (hi - lo) * random();
        });
        const trial = calIk.solve(target, { q: q0 });
        if (trial.positionError + trial.orientationError < r.positionError + r.orientationError) r = trial;
        if (trial.status !== 'unreachable' && trial.status !== 'outside-limits') break;
      }
    }
    counts[r.status]++;
    // Compensated target: the nominal pose at the calibrated joint values, robot base frame.
    const c = nomIk.pose(r.q);
    const a = anglesFromRotation(c.rotation);
    // For frame = measurement the original target is in the tracker frame: compare in the base frame.
    let originalBase = original;
    if (frame === 'measurement' && program.kind === 'cartesian') originalBase = toBase(calibrated.base!, original);
    const correctionVector: [number, number, number] = [c.position[0] - originalBase.position[0], c.position[1] - originalBase.position[1], c.position[2] - originalBase.position[2]];
    const correction = Math.hypot(...correctionVector);
    const rotationCorrection = originalBase.rotation.length === 9 ? angleBetween(c.rotation, originalBase.rotation) : 0;
    out.push({
      target: t.name, line: t.line, q: r.q,
      x: c.position[0], y: c.position[1], z: c.position[2], rx: a.rx, ry: a.ry, rz: a.rz,
      status: r.status, message: r.message, correction, correctionVector, rotationCorrection,
      positionError: r.positionError, orientationError: r.orientationError, smallestSingularValue: r.smallestSingularValue,
    });
    if (r.status !== 'unreachable' && r.status !== 'outside-limits') previous = r.q;
    previousHint = hint;
    if ((k + 1) % every === 0) {
      options.onProgress?.(k + 1, total);
      yield k + 1;
    }
  }
  const good = out.filter((t) => t.status !== 'unreachable' && t.status !== 'outside-limits');
  const maxCorrection = good.reduce((m, t) => Math.max(m, t.correction), 0);
  const rmsCorrection = good.length ? Math.sqrt(good.reduce((s, t) => s + t.correction * t.correction, 0) / good.length) : 0;
  return { kind: program.kind, frame, targets: out, counts, maxCorrection, rmsCorrection, milliseconds: performance.now() - t0 };
}

/** A pose in the tracker frame expressed in the robot base frame B (base pose in the tracker frame). */
function toBase(B: FrameSpec, pose: { position: ArrayLike<number>; rotation: Float64Array }): { position: number[]; rotation: Float64Array } {
  const R = rotationFromAngles(B.rx, B.ry, B.rz);
  const d = [pose.position[0] - B.x, pose.position[1] - B.y, pose.position[2] - B.z];
  // Rᵀ·d
  const position = [0, 1, 2].map((j) => R[j] * d[0] + R[3 + j] * d[1] + R[6 + j] * d[2]);
  let rotation = new Float64Array(0);
  if (pose.rotation.length === 9) {
    rotation = new Float64Array(9);
    for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) {
      rotation[3 * i + j] = R[i] * pose.rotation[j] + R[3 + i] * pose.rotation[3 + j] + R[6 + i] * pose.rotation[6 + j];
    }
  }
  return { position, rotation };
}

/** Parse "x,y,z,rx,ry,rz" (mm, deg) of a tool override; rx,ry,rz optional. */
export function parseToolOption(text: string): FrameSpec | InputProblem {
  const parts = text.split(',').map((s) => s.trim());
  if (parts.length !== 3 && parts.length !== 6) return { column: '--tool', message: `"${text}" has ${parts.length} values`, expected: 'x,y,z or x,y,z,rx,ry,rz (mm, deg; flange frame)' };
  const v = parts.map(Number);
  const bad = parts.findIndex((p, i) => p === '' || !Number.isFinite(v[i]));
  if (bad >= 0) return { column: '--tool', message: `"${parts[bad]}" is not a number`, expected: 'x,y,z or x,y,z,rx,ry,rz (mm, deg; flange frame)' };
  return { x: v[0], y: v[1], z: v[2], rx: v[3] ?? 0, ry: v[4] ?? 0, rz: v[5] ?? 0 };
}
