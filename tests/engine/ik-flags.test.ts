/**
 * How often the inverse-kinematics flags fire falsely and how often they miss, on seeded simulations.
 *   singular: the flag against the smallest singular value of an independently built Jacobian (central
 *     finite differences of the tool pose, SVD by ml-matrix), and on configurations made singular on purpose;
 *   jump: continuous paths without hints (no jump exists) against the same targets reached in the flipped
 *     wrist (a jump of 180° exists at every target);
 *   unreachable / outside-limits: points beyond the reach and poses made with a joint beyond a narrowed limit.
 * Each rate is printed and bounded.
 */
import { describe, expect, it } from 'vitest';
import { Matrix, SingularValueDecomposition } from 'ml-matrix';
import { IkSolver } from '../../src/lib/engine/ik';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { perturbed, randomQ, rng, sixAxisDh, sixAxisMdh } from './helpers';

/** σ_min of the normalised pose Jacobian by central differences (h = 1e-6 rad) and ml-matrix's SVD. */
function referenceSigma(solver: IkSolver, g: ArmGeometry, q: number[]): number {
  const L = solver.options.lengthScale, h = 1e-6, n = q.length;
  const cols: number[][] = [];
  for (let i = 0; i < n; i++) {
    const step = g.joints[i].type === 'prismatic' ? h * L : (h * 180) / Math.PI;
    const a = solver.pose(q.map((v, k) => (k === i ? v + step : v)));
    const b = solver.pose(q.map((v, k) => (k === i ? v - step : v)));
    // ω from the skew part of R_a·R_bᵀ (small angle).
    const M = new Array(9).fill(0);
    for (let r = 0; r < 3; r++) for (let c = 0; c < 3; c++) for (let k = 0; k < 3; k++) M[3 * r + c] += a.rotation[3 * r + k] * b.rotation[3 * c + k];
    const w = [(M[7] - M[5]) / 2, (M[2] - M[6]) / 2, (M[3] - M[1]) / 2];
    const dp = [0, 1, 2].map((k) => a.position[k] - b.position[k]);
    // Columns per unit of normalised joint motion: rows divided by L, prismatic columns times L.
    cols.push([...dp.map((v) => v / (2 * h) / L), ...w.map((v) => v / (2 * h))]);
  }
  const J = new Matrix(6, n);
  cols.forEach((c, i) => c.forEach((v, r) => J.set(r, i, v)));
  const s = new SingularValueDecomposition(J, { autoTranspose: true }).diagonal;
  return Math.min(...s.slice(0, Math.min(6, n)));
}

describe('flag rates on seeded simulations', () => {
  it('singular: agrees with an independent SVD; every purposely singular wrist is flagged', () => {
    const g = perturbed(sixAxisMdh(), 21);
    const solver = new IkSolver(g);
    const r = rng(22);
    const threshold = solver.options.singularThreshold;
    let falseAlarms = 0, misses = 0, clearBelow = 0, clearAbove = 0;
    for (let k = 0; k < 400; k++) {
      const q = randomQ(g, r);
      const t = solver.pose(q);
      const res = solver.solve(t, { q });
      const ref = referenceSigma(solver, g, res.q);
      // Decided only away from the threshold (±10 %): finite differences carry ~1e-6 relative error.
      if (ref > 1.1 * threshold) { clearAbove++; if (res.status === 'singular') falseAlarms++; }
      if (ref < 0.9 * threshold) { clearBelow++; if (res.status !== 'singular') misses++; }
    }
    // Wrist singular on purpose: J5 = 0 (J4 ∥ J6) at random arm positions.
    let wristMisses = 0;
    for (let k = 0; k < 100; k++) {
      const q = randomQ(g, r);
      q[4] = 0;
      const res = solver.solve(solver.pose(q), { q: q.map((v) => v + 0.5) });
      if (res.status !== 'singular') wristMisses++;
    }
    console.info(`singular flag: ${falseAlarms}/${clearAbove} false alarms, ${misses}/${clearBelow} misses, ${wristMisses}/100 wrist misses`);
    expect(clearAbove).toBeGreaterThan(300);
    expect(clearBelow).toBeGreaterThan(0);
    expect(falseAlarms).toBe(0);
    expect(misses).toBe(0);
    expect(wristMisses).toBe(0);
  });

  it('jump: none on continuous paths without hints; every wrist flip is flagged', () => {
    const g = sixAxisDh();
    const solver = new IkSolver(g);
    const r = rng(31);
    let targets = 0, falseAlarms = 0, flips = 0, misses = 0;
    for (let path = 0; path < 20; path++) {
      let q = randomQ(g, r).map((v, i) => (i === 4 ? 40 + 40 * r() : 0.6 * v));
      let previous: number[] | undefined;
      for (let k = 0; k < 50; k++) {
        q = q.map((v, i) => Math.max((g.joints[i].min ?? -180) + 5, Math.min((g.joints[i].max ?? 180) - 5, v + 2 * (r() - 0.5))));
        const res = solver.solve(solver.pose(q), { q: previous ?? q, previous });
        targets++;
        if (res.status === 'jump') falseAlarms++;
        if (previous && res.status !== 'unreachable') {
          // The same pose in the flipped wrist, seeded there (as a program whose configuration flips).
          const flipped = [res.q[0], res.q[1], res.q[2], res.q[3] > 0 ? res.q[3] - 180 : res.q[3] + 180, -res.q[4], res.q[5] > 0 ? res.q[5] - 180 : res.q[5] + 180];
          const f = solver.solve(solver.pose(q), { q: flipped, previous: res.q });
          // A flip happened when the solution really moved a joint beyond the threshold (the solver may also
          // fall back to the unflipped branch from the flipped seed: then there is no jump to flag).
          const moved = Math.max(...f.q.map((v, i) => Math.abs(v - res.q[i])));
          if (f.status !== 'unreachable' && f.status !== 'outside-limits' && moved > solver.options.jumpDegrees) {
            flips++;
            if (f.status !== 'jump') misses++;
          }
        }
        if (res.status !== 'unreachable') previous = res.q;
      }
    }
    console.info(`jump flag: ${falseAlarms}/${targets} false alarms on continuous paths, ${misses}/${flips} flips missed`);
    expect(flips).toBeGreaterThan(500);
    expect(falseAlarms).toBe(0);
    expect(misses).toBe(0);
  });

  it('unreachable and outside-limits: every constructed case flagged, none on reachable poses within limits', () => {
    const g = sixAxisDh();
    const narrow: ArmGeometry = { ...g, joints: g.joints.map((j, i) => (i === 0 ? { ...j, min: -60, max: 60 } : j)) };
    const solver = new IkSolver(narrow);
    const r = rng(41);
    let far = 0, farMissed = 0, beyond = 0, beyondMissed = 0, inside = 0, insideFlagged = 0;
    for (let k = 0; k < 150; k++) {
      const q = randomQ(narrow, r).map((v, i) => (i === 0 ? 0.8 * v : i === 4 ? (v > 0 ? 20 + 0.5 * v : -20 + 0.5 * v) : 0.7 * v));
      const t = solver.pose(q);
      const ok = solver.solve(t, { q: q.map((v) => v + 3 * (r() - 0.5)) });
      inside++;
      if (ok.status === 'unreachable' || ok.status === 'outside-limits') insideFlagged++;
      // Twice the arm's length scale (the sum of all link lengths) from the base: out of reach by construction.
      const norm = Math.hypot(...t.position);
      const out = solver.solve({ position: t.position.map((v) => (v / norm) * 2 * solver.options.lengthScale), rotation: t.rotation }, { q });
      far++;
      if (out.status !== 'unreachable') farMissed++;
      // The same pose with J1 at 90° (beyond the narrowed ±60°), seeded just inside the limit.
      const q2 = [...q];
      q2[0] = 90;
      const t2 = new IkSolver(g).pose(q2);
      const lim = solver.solve(t2, { q: [55, ...q.slice(1)] });
      beyond++;
      if (lim.status !== 'outside-limits') beyondMissed++;
    }
    console.info(`reachable flags: ${insideFlagged}/${inside} false, unreachable ${farMissed}/${far} missed, outside-limits ${beyondMissed}/${beyond} missed`);
    expect(insideFlagged).toBeLessThanOrEqual(2);
    expect(farMissed).toBe(0);
    expect(beyondMissed).toBeLessThanOrEqual(3);
  });
});
