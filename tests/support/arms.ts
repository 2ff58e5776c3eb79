/**
 * The invented arms of the test suite, one definition each. All are made up for Offsetry's tests (no real
 * product's parameters):
 * - "Test arm Pell R6-700" (six axes, DH, beta listed on J3), "Test arm Pell R6-700m" (the same kind of arm in modified
 *   DH) and "Test arm Pell S4-600" (four parallel axes, one prismatic): the engine tests, the URDF tests and the
 *   engine benchmarks;
 * - "Tarn R6-420" (six axes, modified DH): the arm of scripts/scale-fixture.ts (the scale benchmark's sessions),
 *   with a "true" geometry for the fits that tests run through the app.
 */
import type { ArmGeometry } from '../../src/lib/engine/types';
import { scaleJointErrors, scaleNominal, scaleTrackerBase } from '../../scripts/scale-fixture';

/** Invented six-axis articulated arm "Test arm Pell R6-700" (DH), with beta listed on J3 (J2 ∥ J3). */
export function sixAxisDh(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Test arm Pell R6-700',
    convention: 'dh',
    joints: [
      { name: 'J1', type: 'revolute', a: 150, alpha: -90, d: 420, theta: 0, min: -170, max: 170 },
      { name: 'J2', type: 'revolute', a: 610, alpha: 0, d: 0, theta: -90, beta: 0, min: -120, max: 80 },
      { name: 'J3', type: 'revolute', a: 115, alpha: -90, d: 0, theta: 0, min: -110, max: 150 },
      { name: 'J4', type: 'revolute', a: 0, alpha: 90, d: 640, theta: 0, min: -180, max: 180 },
      { name: 'J5', type: 'revolute', a: 0, alpha: -90, d: 0, theta: 0, min: -120, max: 120 },
      { name: 'J6', type: 'revolute', a: 0, alpha: 0, d: 105, theta: 0, min: -350, max: 350 },
    ],
    tool: { x: 12, y: -8, z: 135, rx: 0, ry: 0, rz: 0 },
  };
}

/** The same kind of arm in modified DH (invented values). */
export function sixAxisMdh(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Test arm Pell R6-700m',
    convention: 'mdh',
    joints: [
      { name: 'J1', type: 'revolute', a: 0, alpha: 0, d: 420, theta: 0, min: -170, max: 170 },
      { name: 'J2', type: 'revolute', a: 150, alpha: -90, d: 0, theta: -90, min: -120, max: 80 },
      { name: 'J3', type: 'revolute', a: 610, alpha: 0, d: 0, theta: 0, beta: 0, min: -110, max: 150 },
      { name: 'J4', type: 'revolute', a: 115, alpha: -90, d: 640, theta: 0, min: -180, max: 180 },
      { name: 'J5', type: 'revolute', a: 0, alpha: 90, d: 0, theta: 0, min: -120, max: 120 },
      { name: 'J6', type: 'revolute', a: 0, alpha: -90, d: 105, theta: 0, min: -350, max: 350 },
    ],
    tool: { x: 12, y: -8, z: 135, rx: 0, ry: 0, rz: 0 },
  };
}

/** Invented four-axis arm with a prismatic axis and all axes parallel (SCARA-like layout), DH. */
export function fourAxisParallel(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Test arm Pell S4-600',
    convention: 'dh',
    joints: [
      { name: 'J1', type: 'revolute', a: 325, alpha: 0, d: 380, theta: 0, min: -140, max: 140 },
      { name: 'J2', type: 'revolute', a: 275, alpha: 0, d: 0, theta: 0, min: -145, max: 145 },
      { name: 'J3', type: 'prismatic', a: 0, alpha: 0, d: 0, theta: 0, min: -150, max: 0 },
      { name: 'J4', type: 'revolute', a: 0, alpha: 0, d: -40, theta: 0, min: -360, max: 360 },
    ],
    tool: { x: 30, y: 0, z: -60, rx: 0, ry: 0, rz: 0 },
  };
}

/** The invented Tarn R6-420 arm (one definition, shared with the scale benchmark's fixture). */
export const nominalTq6 = scaleNominal;

/**
 * Tarn R6-420 nominal plus the scale fixture's invented joint errors and tracker placement, with a β on J3 and the
 * nominal tool point.
 */
export function trueTq6(): ArmGeometry {
  const g = nominalTq6();
  g.joints.forEach((j, i) => {
    const [da, dal, dd, dth] = scaleJointErrors[i]!;
    j.a += da;
    j.alpha += dal;
    j.d += dd;
    j.theta += dth;
  });
  g.joints[2]!.beta = 0.03;
  g.base = { ...scaleTrackerBase };
  return g;
}
