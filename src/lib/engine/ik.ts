/**
 * Inverse kinematics on any geometry the engine compiles (DH / modified DH, beta, prismatic joints,
 * base and tool): joint values that bring the tool frame onto a target pose (position + orientation)
 * or a target point (position only).
 *
 * Method: Levenberg–Marquardt (damped least squares) on the analytic geometric Jacobian of the joints,
 * read from the same compiled forward kinematics the fit uses (kinematics.ts records every joint's axis
 * and pivot in the measurement frame). Residual r = [p* − p ; L·ω(R*·Rᵀ)], ω = rotation vector (rad),
 * L = the arm's length scale (mm), so one radian of orientation weighs like L mm. Joint limits are kept
 * by projecting every trial step onto the box [min, max] (projected LM).
 *
 * Every result carries a status in plain words:
 *   reached         within the tolerances (default 1e-9 mm, 1e-9°);
 *   unreachable     the closest configuration found is still `positionError` mm / `orientationError`° away;
 *   outside-limits  the target is reachable only with a joint beyond its limit (which joint, by how much);
 *   jump            reached, but a joint moves more than the threshold from the previous target's solution
 *                   (a different arm configuration: a continuous path would not pass there); reported
 *                   before "singular" when both hold, the message naming both;
 *   singular        reached, but the normalised Jacobian's smallest singular value is below the threshold
 *                   (joint values are ill-determined there: wrist, elbow or shoulder aligned).
 *
 * Model / data split as in kinematics.ts: an IkSolver holds every buffer once; solve() allocates nothing
 * but its result record.
 */
import type { ArmGeometry, FrameSpec } from './types';
import {
  compileArm, createArmData, forwardKinematics, jointsToInternal, type ArmData, type ArmModel, type ForwardKinematicsOptions,
} from './kinematics';
import { DEG } from './parameters';
import { jointParam } from './layout';
import { choleskyInPlace, choleskySolveInPlace, symmetricEigenvaluesInPlace } from './linalg';
import { rotationFromAngles, rotationVector } from './rotations';
import { distanceWords, outsideLimits, reachedStatus, unreachable, type IkResult, type IkSeed } from './ik-status';

export interface IkOptions {
  /** Position tolerance of "reached" (mm). Default 1e-9. */
  positionTolerance?: number;
  /** Orientation tolerance of "reached" (deg). Default 1e-9. */
  orientationTolerance?: number;
  /** Iteration limit per target (each iteration: one forward kinematics with derivatives). Default 100. */
  maxIterations?: number;
  /** Smallest singular value of the normalised Jacobian below which a reached target is "singular". Default 0.002 (about 2 % of random configurations of a six-axis arm fall below it). */
  singularThreshold?: number;
  /** Largest change of a revolute joint from the previous target's solution (deg). Default 90. */
  jumpDegrees?: number;
  /** Largest change of a prismatic joint from the previous target's solution (mm). Default 200. */
  jumpMillimetres?: number;
  /** Keep joints within the geometry's limits. Default true. */
  respectLimits?: boolean;
  /** Length scale L (mm) weighing orientation against position. Default: the arm's reach. */
  lengthScale?: number;
}

interface ResolvedIkOptions {
  positionTolerance: number;
  orientationTolerance: number;
  maxIterations: number;
  singularThreshold: number;
  jumpDegrees: number;
  jumpMillimetres: number;
  respectLimits: boolean;
  lengthScale: number;
}

/** A target for the tool frame, in the frame of the geometry's base (its measurement frame). */
export interface IkTarget {
  /** Position (mm). */
  position: ArrayLike<number>;
  /** Rotation, row-major 3×3; absent ⇒ position only (orientation free). */
  rotation?: ArrayLike<number>;
}

/** A length scale of an arm (mm): the sum of its link lengths and offsets and the tool point's distance. */
export function armLengthScale(geometry: ArmGeometry): number {
  let s = 0;
  for (const j of geometry.joints) s += Math.abs(j.a) + Math.abs(j.d);
  const t = geometry.tool;
  if (t) s += Math.hypot(t.x, t.y, t.z);
  for (const j of geometry.joints) if (j.type === 'prismatic') s += Math.max(Math.abs(j.min ?? 0), Math.abs(j.max ?? 0));
  return Math.max(s, 1);
}

export class IkSolver {
  readonly model: ArmModel;
  readonly data: ArmData;
  readonly options: ResolvedIkOptions;
  private readonly geometry: ArmGeometry;
  private readonly lo: Float64Array;
  private readonly hi: Float64Array;
  private readonly frames: Float64Array;
  /** forwardKinematics options, made once: the tool frame, and the tool frame with every axis and pivot. */
  private readonly withFrames: ForwardKinematicsOptions;
  private readonly withJacobian: ForwardKinematicsOptions;
  private readonly q: Float64Array;
  private readonly qTrial: Float64Array;
  private readonly J: Float64Array; // 6 × n row-major
  private readonly r: Float64Array; // 6
  private readonly A: Float64Array; // n × n
  private readonly L: Float64Array; // n × n Cholesky factor
  private readonly g: Float64Array;
  private readonly dq: Float64Array;
  private readonly M: Float64Array; // 9: R*·Rᵀ
  private readonly gram: Float64Array;
  private readonly eig: Float64Array;

  constructor(geometry: ArmGeometry, options: IkOptions = {}) {
    this.geometry = geometry;
    this.model = compileArm(geometry);
    this.data = createArmData(this.model);
    const n = this.model.n;
    this.options = {
      positionTolerance: options.positionTolerance ?? 1e-9,
      orientationTolerance: options.orientationTolerance ?? 1e-9,
      maxIterations: options.maxIterations ?? 100,
      singularThreshold: options.singularThreshold ?? 0.002,
      jumpDegrees: options.jumpDegrees ?? 90,
      jumpMillimetres: options.jumpMillimetres ?? 200,
      respectLimits: options.respectLimits ?? true,
      lengthScale: options.lengthScale ?? armLengthScale(geometry),
    };
    this.lo = new Float64Array(n);
    this.hi = new Float64Array(n);
    geometry.joints.forEach((j, i) => {
      const unit = j.type === 'prismatic' ? 1 : DEG;
      this.lo[i] = j.min !== undefined ? j.min * unit : -Infinity;
      this.hi[i] = j.max !== undefined ? j.max * unit : Infinity;
    });
    this.frames = new Float64Array(16 * (n + 2));
    this.withFrames = { frames: this.frames };
    this.withJacobian = { frames: this.frames, withDerivatives: true };
    this.q = new Float64Array(n);
    this.qTrial = new Float64Array(n);
    this.J = new Float64Array(6 * n);
    this.r = new Float64Array(6);
    this.A = new Float64Array(n * n);
    this.L = new Float64Array(n * n);
    this.g = new Float64Array(n);
    this.dq = new Float64Array(n);
    this.M = new Float64Array(9);
    const k = Math.max(n, 6);
    this.gram = new Float64Array(k * k);
    this.eig = new Float64Array(k);
  }

  /** Tool frame at joint values (deg / mm): position (mm) and row-major rotation, in the base's frame. */
  pose(qBoundary: ArrayLike<number>): { position: [number, number, number]; rotation: Float64Array } {
    jointsToInternal(this.model, qBoundary, this.qTrial);
    forwardKinematics(this.model, this.data, this.qTrial, this.withFrames);
    const f = this.frames, o = 16 * (this.model.n + 1);
    return {
      position: [f[o + 3], f[o + 7], f[o + 11]],
      rotation: Float64Array.from([f[o], f[o + 1], f[o + 2], f[o + 4], f[o + 5], f[o + 6], f[o + 8], f[o + 9], f[o + 10]]),
    };
  }

  /**
   * Residual at this.qTrial into this.r (rows: 3 position, then 3 scaled orientation when `rot`), and
   * with `jacobian` the joint Jacobian of the residual's negative (∂(p, L·ω)/∂q) into this.J. Returns ½|r|².
   */
  private evaluate(target: IkTarget, jacobian: boolean): number {
    const model = this.model, data = this.data, n = model.n, f = this.frames, o = 16 * (n + 1);
    forwardKinematics(model, data, this.qTrial, jacobian ? this.withJacobian : this.withFrames);
    const p = data.point, t = target.position, r = this.r;
    r[0] = t[0] - p[0]; r[1] = t[1] - p[1]; r[2] = t[2] - p[2];
    let cost = r[0] * r[0] + r[1] * r[1] + r[2] * r[2];
    const R = target.rotation;
    const Ls = this.options.lengthScale;
    if (R) {
      // M = R*·Rᵀ (row-major); R's rows are frames[o + 4i .. o + 4i + 2].
      const M = this.M;
      for (let i = 0; i < 3; i++) {
        for (let j = 0; j < 3; j++) {
          M[3 * i + j] = R[3 * i] * f[o + 4 * j] + R[3 * i + 1] * f[o + 4 * j + 1] + R[3 * i + 2] * f[o + 4 * j + 2];
        }
      }
      rotationVector(M, r, 3);
      r[3] *= Ls; r[4] *= Ls; r[5] *= Ls;
      cost += r[3] * r[3] + r[4] * r[4] + r[5] * r[5];
    }
    if (jacobian) {
      const ax = data.axis, pv = data.pivot, J = this.J, pr = model.prismatic;
      const px = p[0], py = p[1], pz = p[2];
      for (let i = 0; i < n; i++) {
        if (pr[i]) {
          const a = 3 * jointParam(i, 'd');
          J[i] = ax[a]; J[n + i] = ax[a + 1]; J[2 * n + i] = ax[a + 2];
          J[3 * n + i] = 0; J[4 * n + i] = 0; J[5 * n + i] = 0;
        } else {
          const a = 3 * jointParam(i, 'theta');
          const ux = ax[a], uy = ax[a + 1], uz = ax[a + 2];
          const dx = px - pv[a], dy = py - pv[a + 1], dz = pz - pv[a + 2];
          J[i] = uy * dz - uz * dy; J[n + i] = uz * dx - ux * dz; J[2 * n + i] = ux * dy - uy * dx;
          J[3 * n + i] = Ls * ux; J[4 * n + i] = Ls * uy; J[5 * n + i] = Ls * uz;
        }
      }
    }
    return 0.5 * cost;
  }

  private clamp(q: Float64Array): void {
    if (!this.options.respectLimits) return;
    for (let i = 0; i < q.length; i++) q[i] = Math.min(this.hi[i], Math.max(this.lo[i], q[i]));
  }

  /** Projected LM from this.q; leaves the best configuration in this.q and returns its cost and iterations. */
  private iterate(target: IkTarget, limits: boolean): { cost: number; iterations: number } {
    const n = this.model.n, m = target.rotation ? 6 : 3;
    const J = this.J, r = this.r, A = this.A, L = this.L, g = this.g, dq = this.dq;
    const { positionTolerance, orientationTolerance, maxIterations } = this.options;
    const tolP = positionTolerance, tolR = orientationTolerance * DEG * this.options.lengthScale;
    const keep = this.options.respectLimits;
    (this.options as { respectLimits: boolean }).respectLimits = limits;
    this.clamp(this.q);
    this.qTrial.set(this.q);
    let cost = this.evaluate(target, true);
    let mu = -1;
    let it = 0;
    const done = () =>
      Math.hypot(r[0], r[1], r[2]) <= tolP && (m === 3 || Math.hypot(r[3], r[4], r[5]) <= tolR);
    while (it < maxIterations && !done()) {
      it++;
      // A = JᵀJ, g = Jᵀr over the m rows.
      let trace = 0;
      for (let a = 0; a < n; a++) {
        let s = 0;
        for (let k = 0; k < m; k++) s += J[k * n + a] * r[k];
        g[a] = s;
        for (let b = a; b < n; b++) {
          let t = 0;
          for (let k = 0; k < m; k++) t += J[k * n + a] * J[k * n + b];
          A[a * n + b] = t;
          A[b * n + a] = t;
        }
        trace += A[a * n + a];
      }
      if (mu < 0) mu = 1e-9 * (trace / n || 1);
      let accepted = false;
      while (!accepted) {
        // (A + mu I) dq = g by Cholesky.
        for (let k = 0; k < n * n; k++) L[k] = A[k];
        for (let a = 0; a < n; a++) L[a * n + a] += mu;
        if (!choleskyInPlace(L, n)) { mu *= 10; continue; }
        for (let a = 0; a < n; a++) dq[a] = g[a];
        choleskySolveInPlace(L, n, dq);
        for (let a = 0; a < n; a++) this.qTrial[a] = this.q[a] + dq[a];
        this.clamp(this.qTrial);
        const trial = this.evaluate(target, false);
        if (trial < cost) {
          accepted = true;
          this.q.set(this.qTrial);
          cost = this.evaluate(target, true);
          mu = Math.max(mu * 0.2, 1e-15 * (trace / n || 1));
        } else {
          mu *= 8;
          if (mu > 1e12 * (trace / n || 1)) break;
        }
      }
      if (!accepted) {
        // No descent left: restore the residual and Jacobian of the best configuration.
        this.qTrial.set(this.q);
        cost = this.evaluate(target, true);
        break;
      }
    }
    (this.options as { respectLimits: boolean }).respectLimits = keep;
    return { cost, iterations: it };
  }

  /** Smallest singular value of the Jacobian at this.q normalised to be dimensionless. */
  private smallestSingularValue(m: number): number {
    const n = this.model.n, J = this.J, Ls = this.options.lengthScale;
    // Gram matrix of the smaller side: JᵀJ (n×n) or JJᵀ (m×m).
    const k = Math.min(n, m), G = this.gram;
    // Position rows are mm/rad and orientation rows carry L: dividing every row by L makes both
    // dimensionless; a prismatic column (mm/mm) is then multiplied by L (a stroke of L mm).
    const pr = this.model.prismatic;
    const col = (j: number) => (pr[j] ? 1 : 1 / Ls);
    if (n <= m) {
      for (let a = 0; a < n; a++) for (let b = 0; b < n; b++) {
        let t = 0;
        for (let i = 0; i < m; i++) t += J[i * n + a] * J[i * n + b];
        G[a * k + b] = t * col(a) * col(b);
      }
    } else {
      for (let a = 0; a < m; a++) for (let b = 0; b < m; b++) {
        let t = 0;
        for (let j = 0; j < n; j++) t += J[a * n + j] * J[b * n + j] * col(j) * col(j);
        G[a * k + b] = t;
      }
    }
    symmetricEigenvaluesInPlace(G, k, this.eig);
    let least = Infinity;
    for (let i = 0; i < k; i++) least = Math.min(least, this.eig[i]);
    return Math.sqrt(Math.max(0, least));
  }

  private boundary(q: Float64Array): number[] {
    return Array.from(q, (v, i) => (this.model.prismatic[i] ? v : v / DEG));
  }

  /** Solve one target from a seed. */
  solve(target: IkTarget, seed: IkSeed): IkResult {
    const n = this.model.n, m = target.rotation ? 6 : 3, o = this.options, joints = this.geometry.joints;
    jointsToInternal(this.model, seed.q, this.q);
    const start = Float64Array.from(this.q);
    let { iterations } = this.iterate(target, o.respectLimits);
    const errors = () => ({
      position: Math.hypot(this.r[0], this.r[1], this.r[2]),
      orientation: m === 6 ? Math.hypot(this.r[3], this.r[4], this.r[5]) / o.lengthScale / DEG : 0,
    });
    let e = errors();
    const reached = (x: { position: number; orientation: number }) => x.position <= o.positionTolerance && x.orientation <= o.orientationTolerance;
    const sigma = this.smallestSingularValue(m);
    const q = this.boundary(this.q);
    const base = { q, positionError: e.position, orientationError: e.orientation, iterations, smallestSingularValue: sigma };
    const far = distanceWords(e.position, m === 6 ? e.orientation : null);
    if (!reached(e)) {
      // Would the target be reached without the limits? Then the limits are what stands in the way.
      if (o.respectLimits) {
        const atLimit = Array.from(this.q).some((v, i) => v <= this.lo[i] + 1e-12 || v >= this.hi[i] - 1e-12);
        if (atLimit) {
          const bounded = Float64Array.from(this.q);
          this.q.set(start);
          const free = this.iterate(target, false);
          iterations += free.iterations;
          const fe = errors();
          let worst = -1, over = 0;
          for (let i = 0; i < n; i++) {
            const ex = Math.max(this.lo[i] - this.q[i], this.q[i] - this.hi[i], 0);
            if (ex > over) { over = ex; worst = i; }
          }
          if (reached(fe) && worst < 0) {
            // The free solve found a configuration within the limits after all: take it.
            return this.finish(target, seed, m, iterations);
          }
          if (reached(fe)) {
            const needed = this.boundary(this.q)[worst];
            this.q.set(bounded);
            return outsideLimits({ ...base, iterations }, joints[worst], needed, far);
          }
          this.q.set(bounded);
          // restore residual of the bounded solution
          this.qTrial.set(bounded);
          this.evaluate(target, true);
          e = errors();
        }
      }
      return unreachable({ ...base, iterations }, far);
    }
    return this.finish(target, seed, m, iterations, sigma);
  }

  /** Status of a reached configuration in this.q (residual and Jacobian evaluated there). */
  private finish(target: IkTarget, seed: IkSeed, m: number, iterations: number, sigmaKnown?: number): IkResult {
    const o = this.options;
    this.qTrial.set(this.q);
    this.evaluate(target, true);
    const sigma = sigmaKnown ?? this.smallestSingularValue(m);
    const q = this.boundary(this.q);
    const base = {
      q, iterations, smallestSingularValue: sigma,
      positionError: Math.hypot(this.r[0], this.r[1], this.r[2]),
      orientationError: m === 6 ? Math.hypot(this.r[3], this.r[4], this.r[5]) / o.lengthScale / DEG : 0,
    };
    return reachedStatus(base, this.geometry.joints, seed, o);
  }
}

/** A target pose from x, y, z (mm) and rx, ry, rz (deg; R = Rz·Ry·Rx). */
export function targetFromFrame(f: Partial<FrameSpec> & { x: number; y: number; z: number }, withRotation = true): IkTarget {
  return {
    position: [f.x, f.y, f.z],
    rotation: withRotation ? rotationFromAngles(f.rx ?? 0, f.ry ?? 0, f.rz ?? 0) : undefined,
  };
}
