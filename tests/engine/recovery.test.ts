import { errorFunction, probit } from 'simple-statistics';
import { describe, expect, it } from 'vitest';
import { fitSession } from '../../src/lib/engine/fit';
import type { ArmGeometry, JointSpec } from '../../src/lib/engine/types';
import { perturbed, rng, sixAxisDh, sixAxisMdh, synthSession } from './helpers';

function valueOf(g: ArmGeometry, key: string): number {
  const [owner, field] = key.split('.');
  if (owner === 'base') return (g.base as unknown as Record<string, number>)[field];
  if (owner === 'tool') return (g.tool as unknown as Record<string, number>)[field];
  return (g.joints[Number(owner.slice(1)) - 1] as unknown as Record<string, number>)[field] ?? 0;
}

/**
 * A true arm that differs from the nominal only in parameters the engine can identify (redundant ones
 * stay at nominal, exactly as the engine keeps them), so the truth is representable and recoverable.
 */
function representableTruth(nominal: ArmGeometry, seed: number): { truth: ArmGeometry; identified: string[] } {
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
    const angle = ['alpha', 'theta', 'beta'].includes(field);
    const delta = (angle ? 0.05 : 0.6) * s();
    if (owner === 'tool') (truth.tool as unknown as Record<string, number>)[field] += delta;
    else {
      const j = truth.joints[Number(owner.slice(1)) - 1] as JointSpec & Record<string, number>;
      j[field] = (j[field] ?? 0) + delta;
    }
  }
  return { truth, identified };
}

/**
 * z such that P(|N(0,1)| > z) = q. simple-statistics' probit (Winitzki's closed-form inverse erf) is about
 * 0.3 % low this far into the tail, so it is refined by Newton steps on simple-statistics' erf (the
 * Numerical Recipes erfc, relative error below 1.2·10⁻⁷): d/dz P(|N| > z) = −2φ(z).
 */
function twoSidedZ(q: number): number {
  let z = probit(1 - q / 2);
  for (let i = 0; i < 3; i++) {
    const tail = 1 - errorFunction(z / Math.SQRT2);
    z += (tail - q) / (Math.sqrt(2 / Math.PI) * Math.exp((-z * z) / 2));
  }
  return z;
}

const CASES: { name: string; arm: () => ArmGeometry; sigma: number; firstSeed: number }[] = [
  { name: 'six-axis DH, σ = 0.01 mm', arm: sixAxisDh, sigma: 0.01, firstSeed: 1000 },
  { name: 'six-axis DH, σ = 0.02 mm', arm: sixAxisDh, sigma: 0.02, firstSeed: 2000 },
  { name: 'six-axis DH, σ = 0.03 mm', arm: sixAxisDh, sigma: 0.03, firstSeed: 3000 },
  { name: 'six-axis MDH, σ = 0.02 mm', arm: sixAxisMdh, sigma: 0.02, firstSeed: 4000 },
];
/** Independent simulated sessions per case (seeds firstSeed, firstSeed + 10, …; fixed, not chosen). */
const SEEDS = 8;
/** Family-wise probability that the parameter bounds below fail by chance over the whole file. */
const FAMILY_ALPHA = 1e-3;
/** Identified parameters per fit of these six-axis arms (6 joints × 4 + 1 β + 6 base + 3 tool − 7 redundant). */
const IDENTIFIED = 27;
/**
 * Bonferroni correction (common practice for many simultaneous checks; valid whatever the correlation
 * between the estimates): with N = 4 cases × 8 seeds × 27 parameters = 864 checks, each |error| must be
 * below z·SE with P(|N(0,1)| > z) = α/N, so that the chance of any false failure is at most α = 10⁻³.
 * That gives z ≈ 4.86. A standard error reported 2× too small would show each error as N(0, 4) in
 * reported-SE units: P(|z| > 4.86/2 = 2.43) ≈ 1.5 % per check, so ≥ 1 of the 216 checks of a case fails
 * with probability 1 − 0.985²¹⁶ ≈ 96 % (and the pooled mean z² below, ≈ 4, fails for certain). Biased
 * estimates of a few SE are caught the same way; SEs 2× too large give a pooled mean z² ≈ 0.25 < 0.4.
 * Checked once by scaling the reported SEs in this file: × 0.5 failed all four cases (a parameter bound in
 * three, the pooled mean z² of 3.3 in the fourth), × 2 failed all four on the pooled mean z² (0.23–0.26).
 */
const Z_BOUND = twoSidedZ(FAMILY_ALPHA / (CASES.length * SEEDS * IDENTIFIED));

describe('the family-wise bound', () => {
  it('is computed from the normal quantile', () => {
    expect(twoSidedZ(0.05)).toBeCloseTo(1.959964, 5); // textbook two-sided 95 % point
    expect(twoSidedZ(1e-3 / 864)).toBeCloseTo(4.860, 2);
    expect(Z_BOUND).toBeGreaterThan(4.8);
  });
});

// Per seed, the identified parameters' errors are correlated, so Σz² is not χ²₂₇: over 40 seeds of the
// σ = 0.02 mm DH case (seeds 2000…2390, measured once) the mean z² per fit averaged 1.08 with a standard
// deviation of 0.34 (χ²₂₇/27 would give 0.27), and 2 of the 40 fell above 1.8; the largest |z| was 3.9.
// Hence the checks on mean z², residual σ and hold-out RMS are made on the pool of the 8 fits of a case:
// the pooled mean z² behaves like χ²ν/ν with ν ≈ 8 · 2/0.34² ≈ 140, for which [0.4, 1.8] fails by chance
// with probability below 10⁻⁷ (Wilson–Hilferty); with 8 · ~310 residual degrees of freedom the pooled
// residual σ has a relative spread of about 1.4 %, so ±6 % is more than 4 spreads (< 10⁻⁴ per case).
describe('synthetic recovery over several seeds (invented arms, tracker-like noise)', () => {
  for (const c of CASES) {
    it(c.name, () => {
      let z2 = 0, checks = 0, residual2 = 0, residualDof = 0, before2 = 0, after2 = 0, heldOut = 0;
      for (let k = 0; k < SEEDS; k++) {
        const seed = c.firstSeed + 10 * k;
        const nominal = c.arm();
        const { truth, identified } = representableTruth(nominal, seed);
        const poses = synthSession(truth, 150, c.sigma, seed + 10);
        const rep = fitSession(nominal, poses, { holdout: 0.25, seed });
        expect(rep.converged, `seed ${seed}`).toBe(true);
        const ids = rep.parameters.filter((p) => p.status === 'identified');
        expect(ids.map((p) => p.key), `seed ${seed}`).toEqual(identified);
        expect(ids.length, `seed ${seed}`).toBe(IDENTIFIED);
        for (const p of ids) {
          expect(p.standardError, `${p.key}, seed ${seed}`).not.toBeNull();
          const err = Math.abs(p.calibrated - valueOf(truth, p.key));
          z2 += (err / p.standardError!) ** 2;
          checks++;
          expect(err, `${p.key}, seed ${seed}: |error| ${err} vs ${Z_BOUND.toFixed(2)}·SE ${Z_BOUND * p.standardError!}`).toBeLessThan(Z_BOUND * p.standardError!);
        }
        const dof = 3 * rep.statistics.fit.after.n - ids.length;
        residual2 += rep.residualSigmaMm ** 2 * dof;
        residualDof += dof;
        // Held-out 3-D RMS near the noise level (σ·√3 plus a little prediction error) on every fit.
        const ho = rep.statistics.holdout!;
        expect(ho.after.n, `seed ${seed}`).toBeGreaterThan(30);
        expect(ho.after.rms, `seed ${seed}`).toBeGreaterThan(0.7 * c.sigma * Math.sqrt(3));
        expect(ho.after.rms, `seed ${seed}`).toBeLessThan(1.5 * c.sigma * Math.sqrt(3));
        before2 += ho.before.rms ** 2 * ho.before.n;
        after2 += ho.after.rms ** 2 * ho.after.n;
        heldOut += ho.after.n;
        expect(rep.outliers.length, `seed ${seed}`).toBe(0);
      }
      expect(checks).toBe(SEEDS * IDENTIFIED);
      // Pooled mean squared z-score near 1 (see above; a 2× wrong SE gives ≈ 4 or ≈ 0.25).
      expect(z2 / checks).toBeGreaterThan(0.4);
      expect(z2 / checks).toBeLessThan(1.8);
      // Pooled residual σ per coordinate close to the simulated noise.
      const pooledSigma = Math.sqrt(residual2 / residualDof);
      expect(pooledSigma / c.sigma).toBeGreaterThan(0.94);
      expect(pooledSigma / c.sigma).toBeLessThan(1.06);
      // On the held-out poses of all 8 fits, the calibration removes ≥ 95 % of the nominal RMS error.
      expect(Math.sqrt(after2 / heldOut)).toBeLessThan(Math.sqrt(before2 / heldOut) / 20);
    });
  }
});
