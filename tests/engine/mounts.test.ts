/**
 * Any mount: the base orientation is solved as small rotations about the measurement axes, so a robot on
 * a wall (ry = 90°, where the file's rx and rz turn about the same axis), on a ceiling (rx = 180°) or at
 * any orientation over the sphere is recovered. Closed-form reference: the truth the data were made
 * from; the orientation error is the angle vector log(R_est·R_trueᵀ) (Rodrigues, see rotations.ts),
 * compared per measurement axis with the reported standard errors.
 *
 * Family-wise bound: each case gives 13 z-values (3 rotation axes, 3 base coordinates, 6 joint
 * parameters, the tool z), each should be within 3 SE; 10 cases → 130 checks. If the standard errors are
 * right each exceeds 3 with probability 0.0027, so the count of exceedances is about Poisson(0.35):
 * P(count ≥ 4) ≈ 5·10⁻⁴ (closed form of the Poisson tail). The file asserts count ≤ 3 and no |z| above 5
 * (a gross failure), instead of stopping at the first 3.0x by chance. Seeds are 1…10 in order, not chosen.
 * Measured over 40 extra seeds at the wall mount: mean z² 1.24 (0.80 % above 3); at ry = 30°: 1.05.
 */
import { describe, expect, it } from 'vitest';
import { fitSession } from '../../src/lib/engine/fit';
import { DEG } from '../../src/lib/engine/parameters';
import { incrementAngles, logRotation, multiply, transpose, zyxAngles, zyxMatrix } from '../../src/lib/engine/rotations';
import type { ArmGeometry, FrameSpec } from '../../src/lib/engine/types';
import { gaussian, rng, sixAxisDh, synthSession } from './helpers';

const R = (f: FrameSpec) => zyxMatrix(f.rx * DEG, f.ry * DEG, f.rz * DEG);

/** A uniformly random rotation (unit quaternion from four Gaussians) as Z-Y-X angles, deg. */
function randomOrientation(r: () => number): { rx: number; ry: number; rz: number } {
  const q = [gaussian(r), gaussian(r), gaussian(r), gaussian(r)];
  const s = Math.hypot(...q);
  const [w, x, y, z] = q.map((v) => v / s);
  const M = Float64Array.of(
    1 - 2 * (y * y + z * z), 2 * (x * y - w * z), 2 * (x * z + w * y),
    2 * (x * y + w * z), 1 - 2 * (x * x + z * z), 2 * (y * z - w * x),
    2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y),
  );
  const [rx, ry, rz] = zyxAngles(M);
  return { rx: rx / DEG, ry: ry / DEG, rz: rz / DEG };
}

/** Truth: the nominal with changes in clearly identifiable parameters and the given base. */
function truthWith(base: FrameSpec): ArmGeometry {
  const g = sixAxisDh();
  g.joints[1].a += 0.6; g.joints[2].a -= 0.4; g.joints[3].d += 0.5; g.joints[1].theta += 0.03; g.joints[2].alpha += 0.02;
  g.joints[1].beta = 0.015;
  g.tool = { ...g.tool!, z: g.tool!.z + 0.3 };
  return { ...g, base };
}

const zs: { what: string; z: number }[] = [];
const within = (what: string, error: number, se: number) => {
  expect(se, `${what}: standard error`).toBeGreaterThan(0);
  zs.push({ what, z: error / se });
};

function checkRecovery(truth: ArmGeometry, withBase: boolean, seed: number) {
  const tag = `seed ${seed}${withBase ? ', base in the nominal' : ', registered'}`;
  const nominal = sixAxisDh();
  if (withBase) {
    // The file's base is close to the truth (a surveyed mount): 3 mm and 0.5° about every axis off.
    const [rx, ry, rz] = incrementAngles([truth.base!.rx * DEG, truth.base!.ry * DEG, truth.base!.rz * DEG], 0.5 * DEG, -0.5 * DEG, 0.5 * DEG);
    nominal.base = { x: truth.base!.x + 3, y: truth.base!.y - 3, z: truth.base!.z + 3, rx: rx / DEG, ry: ry / DEG, rz: rz / DEG };
  }
  const poses = synthSession(truth, 150, 0.02, seed);
  const rep = fitSession(nominal, poses);
  expect(rep.converged, rep.stopReason).toBe(true);
  expect(rep.statistics.fit.after.rms).toBeLessThan(0.06);
  // Orientation: error angle vector about the measurement axes within 3 SE on each axis.
  const se = rep.baseRotationStandardErrors!;
  expect(se).not.toBeNull();
  const err = logRotation(multiply(R(rep.calibrated.base!), transpose(R(truth.base!))));
  err.forEach((e, k) => within(`${tag}: rotation about ${'xyz'[k]}`, e / DEG, se[k]));
  const byKey = new Map(rep.parameters.map((p) => [p.key, p]));
  for (const f of ['x', 'y', 'z'] as const) {
    const p = byKey.get(`base.${f}`)!;
    within(`${tag}: base.${f}`, p.calibrated - truth.base![f], p.standardError!);
  }
  const joint = (k: string) => {
    const [o, f] = k.split('.');
    return (truth.joints[Number(o.slice(1)) - 1] as unknown as Record<string, number>)[f];
  };
  for (const k of ['J2.a', 'J3.a', 'J4.d', 'J2.theta', 'J3.alpha', 'J2.beta']) {
    const p = byKey.get(k)!;
    expect(p.status, k).toBe('identified');
    within(`${tag}: ${k}`, p.calibrated - joint(k), p.standardError!);
  }
  const tz = byKey.get('tool.z')!;
  within(`${tag}: tool.z`, tz.calibrated - truth.tool!.z, tz.standardError!);
  return rep;
}

describe('base orientation at any mount', () => {
  const place = { x: 1800, y: -600, z: 900 };
  it('wall mount (ry = 90°), with and without a base in the nominal', () => {
    const truth = truthWith({ ...place, rx: 20, ry: 90, rz: -35 });
    for (const withBase of [true, false]) {
      const rep = checkRecovery(truth, withBase, withBase ? 1 : 2);
      // The file's rx and rz are degenerate there: their standard errors are not given, and the note says why.
      if (Math.abs(Math.abs(rep.calibrated.base!.ry) - 90) < 0.06) expect(rep.uncertaintyNote).toContain('wall mount');
    }
  });

  it('ceiling mount (rx = 180°), with and without a base in the nominal', () => {
    const truth = truthWith({ ...place, rx: 180, ry: 0, rz: 15 });
    checkRecovery(truth, true, 3);
    checkRecovery(truth, false, 4);
  });

  it('random orientations over the whole sphere, with and without a base in the nominal', () => {
    const r = rng(55);
    for (let k = 0; k < 3; k++) {
      const truth = truthWith({ ...place, ...randomOrientation(r) });
      checkRecovery(truth, true, 5 + 2 * k);
      checkRecovery(truth, false, 6 + 2 * k);
    }
  });

  it('recovers the truth within 3 standard errors (family-wise: at most 3 of 130 above, none above 5)', () => {
    expect(zs.length).toBe(130);
    const above = zs.filter((x) => Math.abs(x.z) > 3);
    expect(above.length, above.map((x) => `${x.what} z = ${x.z.toFixed(2)}`).join('; ')).toBeLessThanOrEqual(3);
    expect(Math.max(...zs.map((x) => Math.abs(x.z)))).toBeLessThan(5);
  });

  it('a step about the measurement axes is regular at ry = 90° (the file\'s angles are not)', () => {
    // Closed form: a small rotation ω applied at the wall mount gives Exp(ω)·R exactly.
    const a = [0.3, Math.PI / 2, -0.6];
    const b = incrementAngles(a, 1e-3, -2e-3, 5e-4);
    const got = zyxMatrix(b[0], b[1], b[2]);
    const ref = multiply(expFromLog([1e-3, -2e-3, 5e-4]), zyxMatrix(a[0], a[1], a[2]));
    for (let k = 0; k < 9; k++) expect(Math.abs(got[k] - ref[k])).toBeLessThan(1e-12);
  });
});

/** Rodrigues' formula written out independently of rotations.ts (closed form). */
function expFromLog(w: number[]): Float64Array {
  const t = Math.hypot(...w);
  const [x, y, z] = w.map((v) => v / t);
  const c = Math.cos(t), s = Math.sin(t), C = 1 - c;
  return Float64Array.of(
    c + x * x * C, x * y * C - z * s, x * z * C + y * s,
    y * x * C + z * s, c + y * y * C, y * z * C - x * s,
    z * x * C - y * s, z * y * C + x * s, c + z * z * C,
  );
}
