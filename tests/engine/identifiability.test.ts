import { describe, expect, it } from 'vitest';
import { Matrix, EigenvalueDecomposition } from 'ml-matrix';
import { fitSession } from '../../src/lib/engine/fit';
import { symmetricEigenvalues } from '../../src/lib/engine/identifiability';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { fourAxisParallel, perturbed, rng, sixAxisDh, sixAxisMdh, synthSession } from './helpers';

function fixedKeys(g: ArmGeometry, seed: number) {
  const rep = fitSession(g, synthSession(perturbed(g, seed), 60, 0.02, seed + 1));
  const fixed = new Map(rep.parameters.filter((p) => p.status === 'fixed').map((p) => [p.key, p.reason!]));
  return { rep, fixed };
}

describe('identifiability', () => {
  it('six-axis DH arm: first joint d/theta with the base, last joint with the tool, parallel axes', () => {
    const { rep, fixed } = fixedKeys(sixAxisDh(), 61);
    // Known redundancies of DH calibration models (e.g. Hollerbach & Wampler 1996; Everett & Hsu 1988):
    // J1.d and J1.theta duplicate base z and base rz; J6.d, J6.theta, J6.a, J6.alpha act after the last
    // motion and duplicate the tool point; J2 ∥ J3 makes one of their d redundant.
    expect(fixed.get('J1.d')).toBe('redundant with base z: J1.d moves the whole arm along the base axis');
    expect(fixed.get('J1.theta')).toBe('redundant with base rz: J1.theta turns the whole arm about the base axis');
    for (const k of ['J6.a', 'J6.alpha', 'J6.d', 'J6.theta']) expect(fixed.get(k)).toMatch(/^redundant with tool .*after the last joint's motion/);
    expect(fixed.get('J3.d')).toMatch(/^redundant with J2\.d: with consecutive parallel joint axes/);
    for (const k of ['tool.rx', 'tool.ry', 'tool.rz']) expect(fixed.get(k)).toMatch(/does not move the measured point/);
    // Nothing else is fixed: 6 joints × 4 + 1 beta + 6 base + 3 tool = 34 candidates, 7 fixed.
    expect(rep.observability.parameterCount).toBe(34);
    expect(rep.parameters.filter((p) => p.status === 'identified').length).toBe(27);
    expect(rep.observability.rank).toBe(27);
    expect(Number.isFinite(rep.observability.conditionNumber)).toBe(true);
  });

  it('six-axis MDH arm: the whole first joint goes into the base', () => {
    const { fixed } = fixedKeys(sixAxisMdh(), 62);
    for (const k of ['J1.a', 'J1.alpha', 'J1.d', 'J1.theta']) expect(fixed.get(k), k).toMatch(/^redundant with base/);
    for (const k of ['J6.d', 'J6.theta']) expect(fixed.get(k), k).toMatch(/^redundant with tool/);
    expect(fixed.get('J3.d')).toMatch(/J2\.d/);
  });

  it('four-axis arm with a prismatic axis and all axes parallel: handled without failure', () => {
    const g = fourAxisParallel();
    const truth = perturbed(g, 63, 0.5);
    const poses = synthSession(truth, 80, 0.02, 64);
    const rep = fitSession(g, poses, { holdout: 0.25, seed: 3 });
    const fixed = rep.parameters.filter((p) => p.status === 'fixed' && p.group !== 'tool');
    // Every fixed parameter has a plain-words reason; all vertical offsets collapse onto base z.
    for (const p of rep.parameters.filter((q) => q.status === 'fixed')) expect(p.reason, p.key).toMatch(/\w{3,}/);
    for (const k of ['J1.d', 'J2.d', 'J3.d', 'J4.d']) expect(rep.parameters.find((p) => p.key === k)!.status, k).toBe('fixed');
    expect(fixed.length).toBeGreaterThanOrEqual(6);
    const reason = (k: string) => rep.parameters.find((p) => p.key === k)!.reason;
    expect(reason('J2.d')).toBe('redundant with base z: with parallel joint axes, J2.d shifts the rest of the arm along the common axis, as the base frame does');
    expect(reason('tool.z')).toBe('redundant with base z: with all joint axes parallel, tool.z shifts every measured point along the common axis, as the base frame does');
    expect(rep.converged).toBe(true);
    // The fit still explains the data: RMS on held-out poses near the noise (σ√3 ≈ 0.035 mm for 3-D).
    expect(rep.statistics.holdout!.after.rms).toBeLessThan(0.06);
    expect(rep.statistics.holdout!.after.rms).toBeLessThan(rep.statistics.holdout!.before.rms / 5);
  });

  it('a tool point on the last axis: turning that joint does not move the point', () => {
    const g = { ...sixAxisDh(), tool: { x: 0, y: 0, z: 135, rx: 0, ry: 0, rz: 0 } };
    const rep = fitSession(g, synthSession(perturbed(g, 68), 60, 0.02, 69));
    expect(rep.parameters.find((p) => p.key === 'J6.theta')!.reason).toBe(
      'no effect: J6.theta does not move the measured point on these poses (the measured point lies on the axis of J6)',
    );
  });

  it('a joint the poses never move leaves its offset undeterminable, with a reason', () => {
    const g = sixAxisDh();
    const poses = synthSession(perturbed(g, 65), 60, 0.02, 66).map((p) => ({ ...p, q: p.q.map((v, k) => (k === 3 ? 10 : v)) }));
    const rep = fitSession(g, poses);
    // J4 held at one angle merges links 3–5 into one rigid body: four more of their parameters become
    // redundant (27 → 23 identified), each with a reason naming the joint that did not move.
    expect(rep.parameters.filter((q) => q.status === 'identified').length).toBe(23);
    const extra = rep.parameters.filter((q) => q.status === 'fixed' && /^J[45]\./.test(q.key));
    expect(extra.length).toBe(4);
    for (const q of extra) expect(q.reason, q.key).toMatch(/J4 does not move on these poses/);
  });
});

describe('symmetric eigenvalues (observability indices)', () => {
  it('cyclic Jacobi agrees with ml-matrix EigenvalueDecomposition, including tiny eigenvalues', () => {
    const r = rng(67);
    for (const p of [2, 7, 27, 34]) {
      // A graded matrix: columns scaled over six decades, as mm and rad columns are.
      const X = Array.from({ length: 3 * p }, () => Array.from({ length: p }, (_, k) => (r() - 0.5) * 10 ** (-6 * k / p)));
      const A = new Matrix(X).transpose().mmul(new Matrix(X));
      const ref = new EigenvalueDecomposition(A, { assumeSymmetric: true }).realEigenvalues.slice().sort((a, b) => a - b);
      const ours = Array.from(symmetricEigenvalues(Float64Array.from(A.to1DArray()), p)).sort((a, b) => a - b);
      const max = ref[p - 1];
      ref.forEach((v, k) => expect(Math.abs(ours[k] - v)).toBeLessThan(1e-12 * max + 1e-6 * Math.abs(v)));
    }
  });
});
