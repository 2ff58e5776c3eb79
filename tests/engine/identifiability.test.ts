import { describe, expect, it } from 'vitest';
import { Matrix, EigenvalueDecomposition } from 'ml-matrix';
import { fitSession } from '../../src/lib/engine/fit';
import { selectIdentifiable } from '../../src/lib/engine/identifiability';
import { accumulateNormalEquations, normalWork, poseBuffers } from '../../src/lib/engine/jacobian';
import { symmetricEigenvalues, symmetrize } from '../../src/lib/engine/linalg';
import { compileArm, createArmData } from '../../src/lib/engine/kinematics';
import { candidateParameters } from '../../src/lib/engine/parameters';
import type { ArmGeometry, SessionPose } from '../../src/lib/engine/types';
import { fourAxisParallel, perturbed, rng, sixAxisDh, sixAxisMdh, synthSession } from './helpers';

/**
 * The engine's identifiability selection (selectIdentifiable) on `poses` at the nominal, as structured
 * data: each fixed candidate's key → the kept parameters it duplicates, strongest first ([] when its column
 * vanishes: it does not move the measured point at all). The fit report gives the same decision with a
 * plain-words reason only; these tests assert on the relation, not on the wording.
 */
function relations(g: ArmGeometry, poses: SessionPose[]): Map<string, string[]> {
  const model = compileArm(g);
  const data = createArmData(model);
  const candidates = candidateParameters(model.layout);
  const p = candidates.length;
  const A = new Float64Array(p * p);
  accumulateNormalEquations(model, data, model.nominal, poseBuffers(model, poses), Int32Array.from(candidates, (c) => c.index), A, new Float64Array(p), normalWork(p));
  symmetrize(A, p);
  return new Map(selectIdentifiable(A, candidates, g).fixed.map((f) => [f.fixed.info.key, f.fixed.relatedKeys]));
}

function fitAndRelations(g: ArmGeometry, seed: number) {
  const poses = synthSession(perturbed(g, seed), 60, 0.02, seed + 1);
  const rep = fitSession(g, poses);
  const fixed = rep.parameters.filter((p) => p.status === 'fixed').map((p) => p.key).sort();
  return { rep, fixed, related: relations(g, poses) };
}

const TOOL_ROTATIONS = ['tool.rx', 'tool.ry', 'tool.rz'];
const sorted = (keys: Iterable<string>) => [...keys].sort();
const allOf = (keys: string[] | undefined, owner: 'base' | 'tool') => !!keys && keys.length > 0 && keys.every((k) => k.startsWith(`${owner}.`));

describe('identifiability', () => {
  it('six-axis DH arm: first joint d/theta with the base, last joint with the tool, parallel axes', () => {
    const { rep, fixed, related } = fitAndRelations(sixAxisDh(), 61);
    // Known redundancies of DH calibration models (e.g. Hollerbach & Wampler 1996; Everett & Hsu 1988):
    // J1.d and J1.theta duplicate base z and base rz; J6.d, J6.theta, J6.a, J6.alpha act after the last
    // motion and duplicate the tool point; J2 ∥ J3 makes one of their d redundant.
    expect(fixed).toEqual(sorted(['J1.d', 'J1.theta', 'J3.d', 'J6.a', 'J6.alpha', 'J6.d', 'J6.theta', ...TOOL_ROTATIONS]));
    expect(related.get('J1.d')).toEqual(['base.z']);
    expect(related.get('J1.theta')).toEqual(['base.rz']);
    for (const k of ['J6.a', 'J6.alpha', 'J6.d', 'J6.theta']) expect(allOf(related.get(k), 'tool'), `${k}: ${related.get(k)}`).toBe(true);
    expect(related.get('J3.d')).toEqual(['J2.d']);
    // Tool rotations are never candidates (only positions are measured): fixed without a selection.
    expect(sorted(related.keys())).toEqual(fixed.filter((k) => !TOOL_ROTATIONS.includes(k)));
    for (const p of rep.parameters.filter((q) => q.status === 'fixed')) expect(p.reason, p.key).toMatch(/\w{3,}/);
    // Nothing else is fixed: 6 joints × 4 + 1 beta + 6 base + 3 tool = 34 candidates, 7 fixed.
    expect(rep.observability.parameterCount).toBe(34);
    expect(rep.parameters.filter((p) => p.status === 'identified').length).toBe(27);
    expect(rep.observability.rank).toBe(27);
    expect(Number.isFinite(rep.observability.conditionNumber)).toBe(true);
  });

  it('six-axis MDH arm: the whole first joint goes into the base', () => {
    const { fixed, related } = fitAndRelations(sixAxisMdh(), 62);
    for (const k of ['J1.a', 'J1.alpha', 'J1.d', 'J1.theta']) expect(allOf(related.get(k), 'base'), `${k}: ${related.get(k)}`).toBe(true);
    for (const k of ['J6.d', 'J6.theta']) expect(allOf(related.get(k), 'tool'), `${k}: ${related.get(k)}`).toBe(true);
    expect(related.get('J3.d')).toEqual(['J2.d']);
    expect(fixed).toEqual(sorted(['J1.a', 'J1.alpha', 'J1.d', 'J1.theta', 'J3.d', 'J6.d', 'J6.theta', ...TOOL_ROTATIONS]));
    expect(sorted(related.keys())).toEqual(fixed.filter((k) => !TOOL_ROTATIONS.includes(k)));
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
    const related = relations(g, poses);
    // With parallel joint axes every d, and the tool point's z, shifts the arm along the common axis as base z does.
    for (const k of ['J1.d', 'J2.d', 'J3.d', 'J4.d', 'tool.z']) expect(related.get(k), k).toEqual(['base.z']);
    expect(rep.parameters.find((p) => p.key === 'tool.z')!.status).toBe('fixed');
    expect(rep.converged).toBe(true);
    // The fit still explains the data: RMS on held-out poses near the noise (σ√3 ≈ 0.035 mm for 3-D).
    expect(rep.statistics.holdout!.after.rms).toBeLessThan(0.06);
    expect(rep.statistics.holdout!.after.rms).toBeLessThan(rep.statistics.holdout!.before.rms / 5);
  });

  it('a tool point on the last axis: turning that joint does not move the point', () => {
    const g = { ...sixAxisDh(), tool: { x: 0, y: 0, z: 135, rx: 0, ry: 0, rz: 0 } };
    const poses = synthSession(perturbed(g, 68), 60, 0.02, 69);
    const rep = fitSession(g, poses);
    expect(rep.parameters.find((p) => p.key === 'J6.theta')!.status).toBe('fixed');
    // Its column vanishes: fixed for no effect at all, duplicating nothing.
    expect(relations(g, poses).get('J6.theta')).toEqual([]);
  });

  it('a joint the poses never move leaves its offset undeterminable, with a reason', () => {
    const g = sixAxisDh();
    const poses = synthSession(perturbed(g, 65), 60, 0.02, 66).map((p) => ({ ...p, q: p.q.map((v, k) => (k === 3 ? 10 : v)) }));
    const rep = fitSession(g, poses);
    // J4 held at one angle merges links 3–5 into one rigid body: four more of their parameters become
    // redundant (27 → 23 identified), each duplicating parameters of the links it is merged with.
    expect(rep.parameters.filter((q) => q.status === 'identified').length).toBe(23);
    const extra = rep.parameters.filter((q) => q.status === 'fixed' && /^J[45]\./.test(q.key));
    expect(extra.length).toBe(4);
    const related = relations(g, poses);
    for (const q of extra) {
      const keys = related.get(q.key);
      expect(keys && keys.length > 0 && keys.every((k) => /^J[2-5]\./.test(k)), `${q.key}: ${keys}`).toBe(true);
      // Which joint did not move is carried by the reason's text only (the engine has no field for it).
      expect(q.reason, q.key).toMatch(/J4 does not move on these poses/);
    }
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
