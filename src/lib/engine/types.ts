/**
 * Shared types of the calibration engine (pure TypeScript: no Astro, database or Node-only imports
 * in the numerical modules, so the same code runs in endpoints, job workers, the CLI and islands).
 *
 * Units at the boundary (files, reports): lengths in mm, angles in degrees.
 * Units inside the numerical code: mm and radians.
 */

export type Convention = 'dh' | 'mdh';
export type JointType = 'revolute' | 'prismatic';

/** One joint row of the arm geometry file (mm, deg). `beta` present ⇒ identified by default. */
export interface JointSpec {
  name: string;
  type: JointType;
  a: number;
  alpha: number;
  d: number;
  theta: number;
  beta?: number;
  /** Joint limits: deg for revolute, mm for prismatic. Optional: absent ⇒ no limit check. */
  min?: number;
  max?: number;
}

/** A rigid frame: B = Txyz(x,y,z)·Rz(rz)·Ry(ry)·Rx(rx); mm and deg. */
export interface FrameSpec {
  x: number;
  y: number;
  z: number;
  rx: number;
  ry: number;
  rz: number;
}

/** The arm geometry file, format "offsetry-arm/1". */
export interface ArmGeometry {
  format: 'offsetry-arm/1';
  name: string;
  convention: Convention;
  joints: JointSpec[];
  /** Robot base in the measurement (tracker) frame; absent ⇒ identity, registration estimates it. */
  base?: FrameSpec;
  /** Target / tool frame in the flange frame. */
  tool?: FrameSpec;
}

/** Parameter groups, in the order screens show them. */
export const PARAMETER_GROUPS = ['lengths', 'twists', 'offsets', 'beta', 'base', 'tool'] as const;
export type ParameterGroup = (typeof PARAMETER_GROUPS)[number];

/** A problem with an input, precise enough to fix the file: file, physical line (header = 1), column / field. */
export interface InputProblem {
  file?: string;
  line?: number;
  column?: string;
  message: string;
  expected?: string;
}

/** Thrown by parsers and by the engine on bad input; carries every problem found (up to a cap). */
export class EngineInputError extends Error {
  readonly problems: InputProblem[];
  constructor(problems: InputProblem[]) {
    super(problems.map(formatProblem).join('\n'));
    this.name = 'EngineInputError';
    this.problems = problems;
  }
}

export function formatProblem(p: InputProblem): string {
  const where = [p.file, p.line !== undefined ? `line ${p.line}` : undefined, p.column ? `field ${p.column}` : undefined]
    .filter(Boolean)
    .join(', ');
  return `${where ? where + ': ' : ''}${p.message}${p.expected ? ` (expected ${p.expected})` : ''}`;
}

/** One measured pose of a session: joint readings (deg / mm) and the tracker-measured point (mm). */
export interface SessionPose {
  /** Pose label from the `pose` column; repeated labels mark repeat visits (ISO 9283 repeatability). */
  label: string;
  /** Physical line in the CSV (header = 1). */
  line: number;
  q: number[];
  x: number;
  y: number;
  z: number;
  /** From the optional `split` column: 'fit' or 'validate'; absent ⇒ decided by the hold-out fraction. */
  split?: 'fit' | 'validate';
}

/** Error statistics of the 3-D position error |measured − predicted| (mm). */
export interface ErrorStats {
  n: number;
  rms: number;
  mean: number;
  max: number;
  p95: number;
}
