import { describe, expect, it } from 'vitest';
import type { ArmGeometry, JointSpec } from '../../src/lib/engine/types';
import { compileArm, createArmData, forwardKinematics, jointsToInternal, setParameters } from '../../src/lib/engine/kinematics';
import { toolParam } from '../../src/lib/engine/layout';
import { pointJacobian } from '../../src/lib/engine/jacobian';
import { fourAxisParallel, rng, sixAxisDh, sixAxisMdh } from './helpers';

/**
 * Analytic Jacobian against central finite differences, (f(v + h e_j) − f(v − h e_j)) / 2h, for every
 * parameter. Truncation error is O(h²·|f'''|): with h = 1e-4 (mm or rad) on arms of about 1–2 m that is
 * below 1e-5 mm per unit, and rounding error ~1e-16·2000 mm / 1e-4 ≈ 2e-9; we allow 2e-5 · max(1, |col|).
 */
function checkArm(g: ArmGeometry, seed: number) {
  const model = compileArm(g);
  const data = createArmData(model);
  const r = rng(seed);
  const cols = Array.from({ length: model.size }, (_, j) => j);
  const J = new Float64Array(3 * model.size);
  const q = new Float64Array(model.n);
  const h = 1e-4;
  for (let trial = 0; trial < 10; trial++) {
    jointsToInternal(model, g.joints.map((j) => (j.type === 'prismatic' ? -150 * r() : 340 * r() - 170)), q);
    setParameters(model, data, model.nominal);
    forwardKinematics(model, data, q, { withDerivatives: true });
    pointJacobian(model, data, cols, J);
    const v = Float64Array.from(model.nominal);
    for (let j = 0; j < model.size; j++) {
      const save = v[j];
      v[j] = save + h;
      setParameters(model, data, v);
      forwardKinematics(model, data, q);
      const plus = Array.from(data.point);
      v[j] = save - h;
      setParameters(model, data, v);
      forwardKinematics(model, data, q);
      const minus = Array.from(data.point);
      v[j] = save;
      for (let c = 0; c < 3; c++) {
        const fd = (plus[c] - minus[c]) / (2 * h);
        const an = J[3 * j + c];
        expect(Math.abs(fd - an), `${model.layout.params[j].key}[${c}]`).toBeLessThan(2e-5 * Math.max(1, Math.abs(an)));
      }
    }
  }
}

function withFrames(g: ArmGeometry): ArmGeometry {
  // Non-trivial base and tool rotations so every base/tool column is exercised.
  return {
    ...g,
    base: { x: 1200, y: -300, z: 80, rx: 12, ry: -25, rz: 140 },
    tool: { x: 25, y: -14, z: 150, rx: 20, ry: 35, rz: -60 },
    joints: g.joints.map((j, i): JointSpec => ({ ...j, beta: 0.7 * (i + 1) })),
  };
}

describe('analytic Jacobian against central finite differences', () => {
  it('six-axis arm, DH', () => checkArm(withFrames(sixAxisDh()), 21));
  it('six-axis arm, modified DH', () => checkArm(withFrames(sixAxisMdh()), 22));
  it('four-axis arm with a prismatic axis, DH and MDH', () => {
    checkArm(withFrames(fourAxisParallel()), 23);
    checkArm(withFrames({ ...fourAxisParallel(), convention: 'mdh' }), 24);
  });
  it('tool rotation columns are zero (the point does not depend on them)', () => {
    const g = withFrames(sixAxisDh());
    const model = compileArm(g);
    const data = createArmData(model);
    forwardKinematics(model, data, new Float64Array([0.1, 0.2, 0.3, 0.4, 0.5, 0.6]), { withDerivatives: true });
    const J = new Float64Array(9);
    pointJacobian(model, data, [toolParam(model.n, 'rx'), toolParam(model.n, 'ry'), toolParam(model.n, 'rz')], J);
    expect(Array.from(J)).toEqual(new Array(9).fill(0));
  });
});

describe('normal equations accumulated pose by pose', () => {
  it('equal JᵀWJ and JᵀWr formed from the full Jacobian', async () => {
    const { accumulateNormalEquations, normalWork, poseBuffers } = await import('../../src/lib/engine/jacobian');
    const g = withFrames(sixAxisDh());
    const model = compileArm(g);
    const data = createArmData(model);
    const r = rng(25);
    // 70 poses: more than one block of 32, and a partial last block; uneven weights, one zero.
    const poses = Array.from({ length: 70 }, (_, i) => ({
      q: g.joints.map(() => 340 * r() - 170), x: 1000 * r(), y: 1000 * r(), z: 1000 * r(), weight: i === 5 ? 0 : 0.5 + r(),
    }));
    const pb = poseBuffers(model, poses);
    const active = Int32Array.from([0, 1, 2, 3, 4, 7, 8, 12, 19, 26, 30, 31, 32, 33, 34, 35, 36, 37, 38]);
    const p = active.length;
    const A = new Float64Array(p * p), gv = new Float64Array(p);
    const cost = accumulateNormalEquations(model, data, model.nominal, pb, active, A, gv, normalWork(p));
    const Aref = new Float64Array(p * p), gref = new Float64Array(p);
    let cref = 0;
    const J = new Float64Array(3 * p);
    setParameters(model, data, model.nominal);
    for (let i = 0; i < pb.count; i++) {
      forwardKinematics(model, data, pb.q, { offset: i * model.n, withDerivatives: true });
      pointJacobian(model, data, active, J);
      const w = pb.weights[i];
      const res = [0, 1, 2].map((c) => data.point[c] - pb.measured[3 * i + c]);
      cref += w * res.reduce((s, v) => s + v * v, 0);
      for (let a = 0; a < p; a++) {
        for (let c = 0; c < 3; c++) gref[a] += w * J[3 * a + c] * res[c];
        for (let b = 0; b < p; b++) for (let c = 0; c < 3; c++) Aref[a * p + b] += w * J[3 * a + c] * J[3 * b + c];
      }
    }
    expect(Math.abs(cost - 0.5 * cref)).toBeLessThan(1e-9 * cref);
    for (let a = 0; a < p; a++) {
      expect(Math.abs(gv[a] - gref[a])).toBeLessThan(1e-9 * (1 + Math.abs(gref[a])));
      for (let b = a; b < p; b++) expect(Math.abs(A[a * p + b] - Aref[a * p + b])).toBeLessThan(1e-9 * (1 + Math.abs(Aref[a * p + b])));
    }
  });
});
