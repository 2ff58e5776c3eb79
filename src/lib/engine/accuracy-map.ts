/**
 * Before/after accuracy map: how far the calibrated geometry moves the predicted target point from where the
 * nominal geometry puts it, over the arm's working area, on three planes through it.
 *
 * Method: joint configurations are drawn uniformly within the joint limits (seeded, so the map of a set is
 * always the same); for each one, the target point is predicted with the nominal and with the calibrated
 * geometry, each in its own robot base frame (the base transform is left out of both, so the tracker
 * placement of the session does not count), at each geometry's own tool point — as workspaceDifference in
 * ./workspace.ts does, with the same seeded draw, so the two agree on the overall mean and maximum. The
 * difference |p_calibrated − p_nominal| (mm) is binned by the nominal point's position into a grid on
 * three slabs through the median of the reached points: horizontal (x–y), and the two vertical planes
 * (x–z, y–z). A cell shows the mean difference of the configurations that reach it; cells nobody reaches
 * stay empty.
 *
 * Pure code; no Node-only imports.
 */
import { compileArm, createArmData, forwardKinematics, jointsToInternal } from './kinematics';
import type { ArmGeometry } from './types';
import { seededRandom } from './random';
import { jointRanges } from './workspace';

export type PlaneAxes = 'xy' | 'xz' | 'yz';

export interface AccuracyPlane {
  axes: PlaneAxes;
  /** The coordinate held (approximately) fixed: its axis, centre and half-thickness of the slab (mm). */
  fixed: { axis: 'x' | 'y' | 'z'; at: number; halfThickness: number };
  /** Cell edges along the plane's first and second axis (mm), length cells + 1. */
  u: number[];
  v: number[];
  /** Mean difference (mm) per cell, row-major [iv][iu]; null where no sampled configuration lands. */
  cells: (number | null)[][];
  /** Configurations that landed in the slab. */
  samples: number;
}

export interface AccuracyMap {
  planes: AccuracyPlane[];
  /** Colour scale 0 … max (mm), the largest cell value over all planes. */
  scaleMaxMm: number;
  /** Over every sampled configuration (not just the slabs): mean and largest difference (mm). */
  meanMm: number;
  maxMm: number;
  samples: number;
  seed: number;
  cellsPerSide: number;
}

export interface AccuracyMapOptions {
  /** Joint configurations drawn; default 40 000. */
  samples?: number;
  /** Grid cells per side of each plane; default 20. */
  cellsPerSide?: number;
  /** Seed of the draw; default 1. */
  seed?: number;
  /** Slab half-thickness as a fraction of the reach along the fixed axis; default 0.08. */
  slab?: number;
}

const AXIS_INDEX = { x: 0, y: 1, z: 2 } as const;
const PLANES: { axes: PlaneAxes; u: 'x' | 'y'; v: 'y' | 'z'; fixed: 'x' | 'y' | 'z' }[] = [
  { axes: 'xy', u: 'x', v: 'y', fixed: 'z' },
  { axes: 'xz', u: 'x', v: 'z', fixed: 'y' },
  { axes: 'yz', u: 'y', v: 'z', fixed: 'x' },
];

function median(values: Float64Array): number {
  const s = Float64Array.from(values).sort();
  return s.length % 2 ? s[(s.length - 1) / 2]! : (s[s.length / 2 - 1]! + s[s.length / 2]!) / 2;
}

export function accuracyMap(nominal: ArmGeometry, calibrated: ArmGeometry, options: AccuracyMapOptions = {}): AccuracyMap {
  const n = options.samples ?? 40_000;
  const cellsPerSide = options.cellsPerSide ?? 20;
  const seed = options.seed ?? 1;
  const slab = options.slab ?? 0.08;
  if (nominal.joints.length !== calibrated.joints.length) throw new Error('accuracy map: nominal and calibrated have different joint counts');
  const inBase = (g: ArmGeometry): ArmGeometry => ({ ...g, base: undefined });
  const mN = compileArm(inBase(nominal)), mC = compileArm(inBase(calibrated));
  const dN = createArmData(mN), dC = createArmData(mC);
  const ranges = jointRanges(nominal);
  const r = seededRandom(seed);
  const q = new Array<number>(mN.n), qi = new Float64Array(mN.n);
  const pts = [new Float64Array(n), new Float64Array(n), new Float64Array(n)];
  const diff = new Float64Array(n);
  let sum = 0, max = 0;
  for (let k = 0; k < n; k++) {
    for (let j = 0; j < mN.n; j++) q[j] = ranges[j]![0] + (ranges[j]![1] - ranges[j]![0]) * r();
    jointsToInternal(mN, q, qi);
    forwardKinematics(mN, dN, qi);
    jointsToInternal(mC, q, qi);
    forwardKinematics(mC, dC, qi);
    const dx = dC.point[0] - dN.point[0], dy = dC.point[1] - dN.point[1], dz = dC.point[2] - dN.point[2];
    const d = Math.hypot(dx, dy, dz);
    pts[0]![k] = dN.point[0]; pts[1]![k] = dN.point[1]; pts[2]![k] = dN.point[2];
    diff[k] = d;
    sum += d;
    if (d > max) max = d;
  }
  const lo = pts.map((a) => a.reduce((m, v) => Math.min(m, v), Infinity));
  const hi = pts.map((a) => a.reduce((m, v) => Math.max(m, v), -Infinity));
  const mid = pts.map(median);
  let scaleMax = 0;
  const planes: AccuracyPlane[] = PLANES.map((p) => {
    const fi = AXIS_INDEX[p.fixed], ui = AXIS_INDEX[p.u], vi = AXIS_INDEX[p.v];
    const half = Math.max(slab * (hi[fi]! - lo[fi]!), 1e-9);
    const edges = (i: number) => Array.from({ length: cellsPerSide + 1 }, (_, c) => lo[i]! + ((hi[i]! - lo[i]!) * c) / cellsPerSide);
    const total = Array.from({ length: cellsPerSide }, () => new Float64Array(cellsPerSide));
    const count = Array.from({ length: cellsPerSide }, () => new Int32Array(cellsPerSide));
    let samples = 0;
    for (let k = 0; k < n; k++) {
      if (Math.abs(pts[fi]![k]! - mid[fi]!) > half) continue;
      const cu = Math.min(cellsPerSide - 1, Math.floor(((pts[ui]![k]! - lo[ui]!) / (hi[ui]! - lo[ui]! || 1)) * cellsPerSide));
      const cv = Math.min(cellsPerSide - 1, Math.floor(((pts[vi]![k]! - lo[vi]!) / (hi[vi]! - lo[vi]! || 1)) * cellsPerSide));
      total[cv]![cu] += diff[k]!;
      count[cv]![cu]++;
      samples++;
    }
    const cells = total.map((row, iv) => Array.from(row, (t, iu) => (count[iv]![iu]! ? t / count[iv]![iu]! : null)));
    for (const row of cells) for (const c of row) if (c !== null && c > scaleMax) scaleMax = c;
    return { axes: p.axes, fixed: { axis: p.fixed, at: mid[fi]!, halfThickness: half }, u: edges(ui), v: edges(vi), cells, samples };
  });
  return { planes, scaleMaxMm: scaleMax, meanMm: n ? sum / n : 0, maxMm: max, samples: n, seed, cellsPerSide };
}
