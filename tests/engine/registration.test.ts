import { describe, expect, it } from 'vitest';
import { kabsch, transformToFrame } from '../../src/lib/engine/registration';
import { EngineInputError } from '../../src/lib/engine/types';
import { rng } from './helpers';

const DEG = Math.PI / 180;

/** R = Rz(c)·Ry(b)·Rx(a), row-major (the base convention of the geometry file). */
function rotZYX(a: number, b: number, c: number): number[] {
  const ca = Math.cos(a), sa = Math.sin(a), cb = Math.cos(b), sb = Math.sin(b), cc = Math.cos(c), sc = Math.sin(c);
  return [cc * cb, cc * sb * sa - sc * ca, cc * sb * ca + sc * sa, sc * cb, sc * sb * sa + cc * ca, sc * sb * ca - cc * sa, -sb, cb * sa, cb * ca];
}

function apply(R: number[], t: number[], pts: number[]): number[] {
  const out: number[] = [];
  for (let i = 0; i < pts.length; i += 3) {
    for (let r = 0; r < 3; r++) out.push(R[3 * r] * pts[i] + R[3 * r + 1] * pts[i + 1] + R[3 * r + 2] * pts[i + 2] + t[r]);
  }
  return out;
}

describe('Kabsch registration', () => {
  it('recovers known rotations and translations exactly (noise-free)', () => {
    const r = rng(51);
    for (let trial = 0; trial < 30; trial++) {
      const pts = Array.from({ length: 3 * 12 }, () => 2000 * r() - 1000);
      const [a, b, c] = [360 * r() - 180, 170 * r() - 85, 360 * r() - 180];
      const R = rotZYX(a * DEG, b * DEG, c * DEG);
      const t = [5000 * r() - 2500, 5000 * r() - 2500, 1000 * r()];
      const T = kabsch(pts, apply(R, t, pts));
      T.R.forEach((v, k) => expect(Math.abs(v - R[k])).toBeLessThan(1e-12));
      t.forEach((v, k) => expect(Math.abs(T.t[k] - v)).toBeLessThan(1e-8));
      expect(T.rms).toBeLessThan(1e-9);
      expect(T.reflectionGuarded).toBe(false);
      // And the frame (mm, deg) of the transform gives back the angles: Txyz·Rz·Ry·Rx.
      const f = transformToFrame(T);
      expect(f.rx).toBeCloseTo(a, 8);
      expect(f.ry).toBeCloseTo(b, 8);
      expect(f.rz).toBeCloseTo(c, 8);
    }
  });

  it('a 90° turn about z maps x onto y', () => {
    // Hand-checked: Rz(90°) = [[0,−1,0],[1,0,0],[0,0,1]].
    const pts = [1, 0, 0, 0, 1, 0, 0, 0, 1, 2, 3, 4];
    const moved = [0, 1, 0, -1, 0, 0, 0, 0, 1, -3, 2, 4];
    const T = kabsch(pts, moved);
    [0, -1, 0, 1, 0, 0, 0, 0, 1].forEach((v, k) => expect(T.R[k]).toBeCloseTo(v, 12));
  });

  it('returns a proper rotation when the best orthogonal fit is a reflection', () => {
    // Mirror image of a point set (z → −z): the unconstrained orthogonal Procrustes answer has det −1
    // (Umeyama 1991); the guard must give det +1 and a larger residual.
    const r = rng(52);
    const pts = Array.from({ length: 3 * 10 }, () => 1000 * r() - 500);
    const mirrored = pts.map((v, i) => (i % 3 === 2 ? -v : v));
    const T = kabsch(pts, mirrored);
    const R = T.R;
    const det = R[0] * (R[4] * R[8] - R[5] * R[7]) - R[1] * (R[3] * R[8] - R[5] * R[6]) + R[2] * (R[3] * R[7] - R[4] * R[6]);
    expect(det).toBeCloseTo(1, 12);
    expect(T.reflectionGuarded).toBe(true);
    expect(T.rms).toBeGreaterThan(1);
  });

  it('refuses fewer than three points with a clear message', () => {
    expect(() => kabsch([0, 0, 0, 1, 1, 1], [0, 0, 0, 1, 1, 1])).toThrow(EngineInputError);
    expect(() => kabsch([0, 0, 0, 1, 1, 1], [0, 0, 0, 1, 1, 1])).toThrow(/at least 3/);
  });
});
