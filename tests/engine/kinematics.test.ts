import { describe, expect, it } from 'vitest';
import { Matrix4 } from 'three';
import type { ArmGeometry, JointSpec } from '../../src/lib/engine/types';
import { forwardFrames, forwardPoint } from '../../src/lib/engine/kinematics';
import { fourAxisParallel, randomQ, rng, sixAxisDh, sixAxisMdh } from './helpers';

const DEG = Math.PI / 180;
// Double-precision FK of arms about 1 m long: agreement to 1e-9 mm is rounding level.
const TOL_MM = 1e-9;

function arm(convention: 'dh' | 'mdh', joints: Partial<JointSpec>[], tool?: ArmGeometry['tool']): ArmGeometry {
  return {
    format: 'offsetry-arm/1', name: 'test', convention,
    joints: joints.map((j, i) => ({ name: `J${i + 1}`, type: 'revolute', a: 0, alpha: 0, d: 0, theta: 0, ...j })),
    tool,
  };
}

describe('forward kinematics against closed forms', () => {
  it('planar two-link arm: x = l1 cos q1 + l2 cos(q1+q2), y = l1 sin q1 + l2 sin(q1+q2)', () => {
    // Closed form of the planar 2R arm (common practice; any robotics textbook).
    const l1 = 400, l2 = 250;
    const g = arm('dh', [{ a: l1 }, { a: l2 }]);
    const r = rng(3);
    for (let k = 0; k < 50; k++) {
      const q1 = 360 * r() - 180, q2 = 360 * r() - 180;
      const p = forwardPoint(g, [q1, q2]);
      expect(p[0]).toBeCloseTo(l1 * Math.cos(q1 * DEG) + l2 * Math.cos((q1 + q2) * DEG), 9);
      expect(p[1]).toBeCloseTo(l1 * Math.sin(q1 * DEG) + l2 * Math.sin((q1 + q2) * DEG), 9);
      expect(p[2]).toBeCloseTo(0, 9);
    }
  });

  it('three-joint articulated (elbow) arm', () => {
    // Elbow manipulator closed form (common practice; e.g. Spong, Hutchinson & Vidyasagar,
    // "Robot Modeling and Control", elbow manipulator): r = l2 cos q2 + l3 cos(q2+q3),
    // x = r cos q1, y = r sin q1, z = h + l2 sin q2 + l3 sin(q2+q3).
    const h = 350, l2 = 500, l3 = 420;
    const g = arm('dh', [{ d: h, alpha: 90 }, { a: l2 }, { a: l3 }]);
    const r = rng(4);
    for (let k = 0; k < 50; k++) {
      const q = [360 * r() - 180, 360 * r() - 180, 360 * r() - 180];
      const [q1, q2, q3] = q.map((v) => v * DEG);
      const rr = l2 * Math.cos(q2) + l3 * Math.cos(q2 + q3);
      const p = forwardPoint(g, q);
      expect(p[0]).toBeCloseTo(rr * Math.cos(q1), 9);
      expect(p[1]).toBeCloseTo(rr * Math.sin(q1), 9);
      expect(p[2]).toBeCloseTo(h + l2 * Math.sin(q2) + l3 * Math.sin(q2 + q3), 9);
    }
  });

  it('prismatic joint adds q to d', () => {
    const g = fourAxisParallel();
    const p0 = forwardPoint(g, [10, 20, 0, 30]);
    const p1 = forwardPoint(g, [10, 20, -75, 30]);
    expect(p1[0] - p0[0]).toBeCloseTo(0, 9);
    expect(p1[1] - p0[1]).toBeCloseTo(0, 9);
    expect(p1[2] - p0[2]).toBeCloseTo(-75, 9);
  });

  it('DH and modified DH descriptions of the same arm give the same points', () => {
    // Same arm: MDH joint i takes alpha, a of DH joint i−1 and d, theta of DH joint i (common practice).
    const dh = sixAxisDh(), mdh = sixAxisMdh();
    // A non-zero Hayati beta carries over too: DH Tx(a)Rx(alpha)Ry(beta) at the end of A_2 equals MDH
    // Rx(alpha)Tx(a)Ry(beta) at the start of A_3 (Rx and Tx commute).
    dh.joints[1].beta = 0.3;
    mdh.joints[2].beta = 0.3;
    const r = rng(5);
    for (let k = 0; k < 100; k++) {
      const q = randomQ(dh, r);
      const a = forwardPoint(dh, q), b = forwardPoint(mdh, q);
      for (let c = 0; c < 3; c++) expect(Math.abs(a[c] - b[c])).toBeLessThan(TOL_MM);
    }
    // The planar two-link arm in MDH: the second link length goes into the tool.
    const p2 = forwardPoint(arm('mdh', [{}, { a: 400 }], { x: 250, y: 0, z: 0, rx: 0, ry: 0, rz: 0 }), [30, 40]);
    expect(p2[0]).toBeCloseTo(400 * Math.cos(30 * DEG) + 250 * Math.cos(70 * DEG), 9);
    expect(p2[1]).toBeCloseTo(400 * Math.sin(30 * DEG) + 250 * Math.sin(70 * DEG), 9);
  });
});

describe('forward kinematics against three.js Matrix4 composition', () => {
  // Independent general-purpose 3-D library (three.js Matrix4): each elementary transform built by
  // makeRotationX/Y/Z and makeTranslation, multiplied in the order the geometry file defines.
  const rot = (axis: 'x' | 'y' | 'z', deg: number) =>
    axis === 'x' ? new Matrix4().makeRotationX(deg * DEG) : axis === 'y' ? new Matrix4().makeRotationY(deg * DEG) : new Matrix4().makeRotationZ(deg * DEG);
  const tr = (x: number, y: number, z: number) => new Matrix4().makeTranslation(x, y, z);
  const frame = (f: { x: number; y: number; z: number; rx: number; ry: number; rz: number }) =>
    tr(f.x, f.y, f.z).multiply(rot('z', f.rz)).multiply(rot('y', f.ry)).multiply(rot('x', f.rx));

  it('random chains in both conventions, with base, tool, beta and prismatic joints', () => {
    const r = rng(11);
    const u = (lo: number, hi: number) => lo + (hi - lo) * r();
    for (let trial = 0; trial < 60; trial++) {
      const convention = trial % 2 ? 'dh' : 'mdh';
      const n = 1 + Math.floor(r() * 7);
      const joints: JointSpec[] = [];
      for (let i = 0; i < n; i++) {
        joints.push({
          name: `J${i + 1}`, type: r() < 0.25 ? 'prismatic' : 'revolute',
          a: u(-500, 500), alpha: u(-180, 180), d: u(-500, 500), theta: u(-180, 180), beta: u(-5, 5),
        });
      }
      const randFrame = () => ({ x: u(-2000, 2000), y: u(-2000, 2000), z: u(-2000, 2000), rx: u(-180, 180), ry: u(-89, 89), rz: u(-180, 180) });
      const g: ArmGeometry = { format: 'offsetry-arm/1', name: 'random', convention, joints, base: randFrame(), tool: randFrame() };
      const q = joints.map((j) => (j.type === 'prismatic' ? u(-300, 300) : u(-180, 180)));
      const M = frame(g.base!);
      const expectedFrames: Matrix4[] = [M.clone()];
      joints.forEach((j, i) => {
        const th = j.theta + (j.type === 'revolute' ? q[i] : 0);
        const d = j.d + (j.type === 'prismatic' ? q[i] : 0);
        const A = convention === 'dh'
          ? rot('z', th).multiply(tr(0, 0, d)).multiply(tr(j.a, 0, 0)).multiply(rot('x', j.alpha)).multiply(rot('y', j.beta!))
          : rot('x', j.alpha).multiply(tr(j.a, 0, 0)).multiply(rot('y', j.beta!)).multiply(rot('z', th)).multiply(tr(0, 0, d));
        M.multiply(A);
        expectedFrames.push(M.clone());
      });
      M.multiply(frame(g.tool!));
      expectedFrames.push(M.clone());
      const p = forwardPoint(g, q);
      // three stores column-major; elements 12..14 are the translation.
      for (let c = 0; c < 3; c++) expect(Math.abs(p[c] - M.elements[12 + c])).toBeLessThan(1e-8);
      const frames = forwardFrames(g, q);
      expect(frames.length).toBe(n + 2);
      frames.forEach((f, k) => {
        const e = expectedFrames[k].elements;
        for (let row = 0; row < 4; row++) for (let col = 0; col < 4; col++) {
          expect(Math.abs(f[4 * row + col] - e[4 * col + row])).toBeLessThan(1e-8);
        }
      });
    }
  });
});
