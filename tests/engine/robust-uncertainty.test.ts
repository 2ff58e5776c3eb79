/**
 * Honest uncertainties and solver ends.
 *  - Robust losses: standard errors from the sandwich estimator (Huber 1967; formula in uncertainty.ts)
 *    cover the truth at the nominal rate over seeded trials with outliers.
 *  - A singular or non-decreasing end is "not converged", with the reason (closed-form problems).
 *  - The report says the standard errors are conditional on the parameters held at nominal.
 */
import { describe, expect, it } from 'vitest';
import { fitSession } from '../../src/lib/engine/fit';
import { levenbergMarquardt, type LeastSquaresProblem } from '../../src/lib/engine/lm';
import { sandwichCovariance } from '../../src/lib/engine/uncertainty';
import type { ArmGeometry, JointSpec, SessionPose } from '../../src/lib/engine/types';
import { gaussian, perturbed, rng, sixAxisDh, synthSession } from './helpers';

function valueOf(g: ArmGeometry, key: string): number {
  const [owner, field] = key.split('.');
  if (owner === 'base') return (g.base as unknown as Record<string, number>)[field];
  if (owner === 'tool') return (g.tool as unknown as Record<string, number>)[field];
  return (g.joints[Number(owner.slice(1)) - 1] as unknown as Record<string, number>)[field] ?? 0;
}

/** A truth that differs from the nominal only in parameters the engine identifies (as in recovery.test.ts). */
function representableTruth(nominal: ArmGeometry, seed: number): ArmGeometry {
  const probe = fitSession(nominal, synthSession(perturbed(nominal, seed), 80, 0.02, seed + 1));
  const identified = probe.parameters.filter((p) => p.status === 'identified').map((p) => p.key);
  const r = rng(seed + 2);
  const s = () => 2 * r() - 1;
  const truth: ArmGeometry = structuredClone(nominal);
  truth.base = { x: 2400 + 50 * s(), y: -700 + 50 * s(), z: -250 + 20 * s(), rx: 0.5 * s(), ry: 0.5 * s(), rz: 30 + 5 * s() };
  truth.tool = { ...nominal.tool! };
  for (const key of identified) {
    const [owner, field] = key.split('.');
    if (owner === 'base') continue;
    const delta = (['alpha', 'theta', 'beta'].includes(field) ? 0.05 : 0.6) * s();
    if (owner === 'tool') (truth.tool as unknown as Record<string, number>)[field] += delta;
    else {
      const j = truth.joints[Number(owner.slice(1)) - 1] as JointSpec & Record<string, number>;
      j[field] = (j[field] ?? 0) + delta;
    }
  }
  return truth;
}

/** 10 % of the poses get a gross error of 0.3–1.5 mm in a random direction (a slipped target, a bad shot). */
function withOutliers(poses: SessionPose[], seed: number): SessionPose[] {
  const r = rng(seed);
  return poses.map((p) => {
    if (r() >= 0.1) return p;
    const d = [gaussian(r), gaussian(r), gaussian(r)];
    const s = (0.3 + 1.2 * r()) / Math.hypot(...d);
    return { ...p, x: p.x + s * d[0], y: p.y + s * d[1], z: p.z + s * d[2] };
  });
}

describe('sandwich standard errors under a robust loss', () => {
  // Family-wise justification of the 90–99 % band: the pooled coverage over T trials has a sampling
  // standard deviation that the test measures from the per-trial coverages (trials are independent;
  // parameters within a trial are not, so the binomial formula would be too optimistic). The test also
  // asserts that this standard deviation is below 1.2 %, so both ends of the band are more than 3.3 of
  // them from 95 %: a correct estimator fails this test by chance with probability below 0.1 % (normal
  // tail; T = 50 trials). Seeds are 1000 + t, t = 0 … 49, in order.
  for (const loss of ['huber', 'cauchy'] as const) {
    it(`${loss}: 95 % intervals cover the truth at 90–99 % over 50 seeded sessions with 10 % outliers`, () => {
      const nominal = sixAxisDh();
      const T = 50;
      const perTrial: number[] = [];
      let covered = 0, total = 0;
      for (let t = 0; t < T; t++) {
        const seed = 1000 + t;
        const truth = representableTruth(nominal, seed);
        const poses = withOutliers(synthSession(truth, 120, 0.02, seed + 500), seed + 900);
        const rep = fitSession(nominal, poses, { robust: loss, robustScaleMm: 0.05 });
        expect(rep.converged).toBe(true);
        let c = 0, n = 0;
        for (const p of rep.parameters) {
          if (p.status !== 'identified' || p.standardError === null) continue;
          const err = Math.abs(p.calibrated - valueOf(truth, p.key));
          if (err <= 1.959964 * p.standardError) c++;
          n++;
        }
        perTrial.push(c / n);
        covered += c;
        total += n;
      }
      const coverage = covered / total;
      const mean = perTrial.reduce((a, b) => a + b, 0) / T;
      const sd = Math.sqrt(perTrial.reduce((a, b) => a + (b - mean) ** 2, 0) / (T - 1) / T);
      console.log(`${loss}: coverage ${(100 * coverage).toFixed(1)} % of ${total} intervals, sd of the pooled coverage ${(100 * sd).toFixed(2)} %`);
      expect(sd).toBeLessThan(0.012);
      expect(coverage).toBeGreaterThanOrEqual(0.9);
      expect(coverage).toBeLessThanOrEqual(0.99);
    }, 120_000);
  }

  it('the sandwich formula equals H⁻¹BH⁻¹·m/(m − p) computed directly (closed form, 2×2)', () => {
    const H = Float64Array.of(4, 1, 1, 3), B = Float64Array.of(2, 0.5, 0.5, 1);
    const cov = sandwichCovariance(H, B, 2, 12)!;
    // H⁻¹ = [3 −1; −1 4] / 11.
    const Hi = [[3 / 11, -1 / 11], [-1 / 11, 4 / 11]];
    const Bm = [[2, 0.5], [0.5, 1]];
    for (let a = 0; a < 2; a++) for (let b = 0; b < 2; b++) {
      let s = 0;
      for (let i = 0; i < 2; i++) for (let j = 0; j < 2; j++) s += Hi[a][i] * Bm[i][j] * Hi[j][b];
      expect(cov[2 * a + b]).toBeCloseTo((s * 12) / 10, 14);
    }
  });

  it('the report states the method and that the errors are conditional on the parameters held at nominal', () => {
    const nominal = sixAxisDh();
    const poses = synthSession(perturbed(nominal, 3), 80, 0.02, 4);
    const plain = fitSession(nominal, poses);
    expect(plain.uncertaintyNote).toMatch(/conditional on the \d+ parameters held at nominal/);
    expect(fitSession(nominal, poses, { robust: 'huber' }).uncertaintyNote).toContain('sandwich estimator');
  });
});

describe('solver ends', () => {
  // Closed-form problems: f(x) = ½(x − 1)².
  const quadratic = (gradientSign: number, broken = false): LeastSquaresProblem => ({
    size: 1,
    cost: (x) => 0.5 * (x[0] - 1) ** 2,
    normalEquations(x, A, g) {
      A[0] = broken ? NaN : 1;
      g[0] = gradientSign * (x[0] - 1);
      return 0.5 * (x[0] - 1) ** 2;
    },
  });

  it('a well-posed problem converges to x = 1', () => {
    const r = levenbergMarquardt(quadratic(1), [5]);
    expect(r.converged).toBe(true);
    expect(r.x[0]).toBeCloseTo(1, 6);
  });

  it('a Cholesky failure at every damping is "not converged" (singular), never converged', () => {
    const r = levenbergMarquardt(quadratic(1, true), [5]);
    expect(r.stop).toBe('singular');
    expect(r.converged).toBe(false);
    expect(r.stopReason).toMatch(/^not converged: the normal equations could not be factorised/);
  });

  it('a gradient that points uphill (no step lowers the cost) is "not converged"', () => {
    const r = levenbergMarquardt(quadratic(-1), [5], { stepTolerance: 0 });
    expect(r.stop).toBe('no-decrease');
    expect(r.converged).toBe(false);
    expect(r.stopReason).toMatch(/^not converged/);
  });

  it('a fit on data with a NaN-producing nominal is reported as not converged with a serious warning', () => {
    // A nominal whose joint has a non-finite link length: every normal equation is NaN.
    const nominal = sixAxisDh();
    const poses = synthSession(nominal, 60, 0.02, 9);
    nominal.joints[3].d = Number.NaN;
    const rep = fitSession(nominal, poses);
    expect(rep.converged).toBe(false);
    expect(rep.warnings.find((w) => w.code === 'not-converged')?.severity).toBe('serious');
  });
});
