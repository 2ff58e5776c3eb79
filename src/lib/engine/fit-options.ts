/**
 * Options of a fit (what the job runner, the API and the CLI pass), their defaults and checks, and the
 * check that a geometry and a session agree before anything is computed.
 */
import type { ArmGeometry, ParameterGroup, SessionPose } from './types';
import { EngineInputError, PARAMETER_GROUPS, type InputProblem } from './types';
import { DEFAULT_NOISE_MM } from './warnings';

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
