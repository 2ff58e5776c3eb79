/**
 * Pose accuracy AP and pose repeatability RP from repeated visits of the same commanded pose, following
 * ISO 9283:1998 "Manipulating industrial robots — Performance criteria and related test methods",
 * clause 7.2 (pose accuracy and pose repeatability), position part only (the session measures a point,
 * not an orientation). Clause number and formulas recalled from memory:
 *
 *   barycentre  x̄ = (1/n) Σ x_j   (likewise ȳ, z̄)
 *   AP_P = sqrt((x̄ − x_c)² + (ȳ − y_c)² + (z̄ − z_c)²),  AP_x = x̄ − x_c, …
 *   l_j  = sqrt((x_j − x̄)² + (y_j − ȳ)² + (z_j − z̄)²),  l̄ = (1/n) Σ l_j
 *   S_l  = sqrt(Σ (l_j − l̄)² / (n − 1))
 *   RP_l = l̄ + 3 S_l
 *
 * The standard's commanded position (x_c, y_c, z_c) is, here, the position the arm model predicts for the
 * commanded joint values, expressed in the measurement frame. The standard reports the figures per pose
 * (its test uses 5 poses and 30 cycles); the overall figure here is the worst pose.
 */

export type Vec3 = [number, number, number];

export interface Iso9283Group {
  label: string;
  /** Commanded position: the model-predicted point for the commanded joints (mm). */
  predicted: Vec3;
  /** Attained positions of every visit (mm). */
  measured: Vec3[];
}

export interface Iso9283Pose {
  label: string;
  /** Number of visits n. */
  visits: number;
  barycentre: Vec3;
  /** AP_x, AP_y, AP_z (mm): barycentre minus commanded. */
  apAxes: Vec3;
  /** AP_P (mm). */
  ap: number;
  /** l̄ (mm). */
  meanDistance: number;
  /** S_l (mm); null with a single visit (the (n − 1) divisor needs n ≥ 2). */
  stdDistance: number | null;
  /** RP_l = l̄ + 3 S_l (mm); null with a single visit. */
  rp: number | null;
}

export interface Iso9283Result {
  poses: Iso9283Pose[];
  /** Worst AP over the poses (mm), null when there are none. */
  ap: number | null;
  /** Worst RP over the poses with at least two visits (mm), null when there are none. */
  rp: number | null;
  /** Label of the worst AP / RP pose. */
  apPose: string | null;
  rpPose: string | null;
}

export function iso9283(groups: Iso9283Group[]): Iso9283Result {
  const poses: Iso9283Pose[] = [];
  let ap: number | null = null;
  let rp: number | null = null;
  let apPose: string | null = null;
  let rpPose: string | null = null;
  for (const g of groups) {
    const n = g.measured.length;
    if (n === 0) throw new Error(`ISO 9283: pose "${g.label}" has no measured visit`);
    let bx = 0, by = 0, bz = 0;
    for (const m of g.measured) { bx += m[0]; by += m[1]; bz += m[2]; }
    bx /= n; by /= n; bz /= n;
    const apAxes: Vec3 = [bx - g.predicted[0], by - g.predicted[1], bz - g.predicted[2]];
    const apP = Math.hypot(apAxes[0], apAxes[1], apAxes[2]);
    const l = g.measured.map((m) => Math.hypot(m[0] - bx, m[1] - by, m[2] - bz));
    const lMean = l.reduce((s, v) => s + v, 0) / n;
    let sl: number | null = null;
    let rpl: number | null = null;
    if (n >= 2) {
      sl = Math.sqrt(l.reduce((s, v) => s + (v - lMean) ** 2, 0) / (n - 1));
      rpl = lMean + 3 * sl;
    }
    poses.push({ label: g.label, visits: n, barycentre: [bx, by, bz], apAxes, ap: apP, meanDistance: lMean, stdDistance: sl, rp: rpl });
    if (ap === null || apP > ap) { ap = apP; apPose = g.label; }
    if (rpl !== null && (rp === null || rpl > rp)) { rp = rpl; rpPose = g.label; }
  }
  return { poses, ap, rp, apPose, rpPose };
}

/**
 * Group session poses by label for ISO 9283: only labels visited at least `minVisits` times (default 2).
 * `predict` gives the model point (measurement frame) for a joint vector.
 */
export function repeatGroups(
  poses: { label: string; q: number[]; x: number; y: number; z: number }[],
  predict: (q: number[]) => Vec3,
  minVisits = 2,
): Iso9283Group[] {
  const byLabel = new Map<string, { q: number[]; measured: Vec3[] }>();
  for (const p of poses) {
    const g = byLabel.get(p.label);
    if (g) g.measured.push([p.x, p.y, p.z]);
    else byLabel.set(p.label, { q: p.q, measured: [[p.x, p.y, p.z]] });
  }
  const out: Iso9283Group[] = [];
  for (const [label, g] of byLabel) {
    if (g.measured.length >= minVisits) out.push({ label, predicted: predict(g.q), measured: g.measured });
  }
  return out;
}
