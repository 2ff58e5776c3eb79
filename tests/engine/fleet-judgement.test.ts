/**
 * The fleet judgement's false-alarm rate and power, measured by seeded simulation, and its special
 * functions against SciPy.
 */
import { describe, expect, it } from 'vitest';
import { digamma, inverseTrigamma, studentTwoSidedCritical, studentTwoSidedP, tetragamma, trigamma } from '../../src/lib/engine/distributions';
import { judgeFleet, variancePrior, type FleetParameterInput } from '../../src/lib/engine/fleet-judgement';
import { seededRandom } from '../../src/lib/engine/random';

describe('distributions', () => {
  it('match SciPy', () => {
    // Reference values from SciPy 1.17: 2*scipy.stats.t.sf(t, df), scipy.stats.t.isf, scipy.stats.norm.isf, scipy.special.
    expect(studentTwoSidedP(2.5, 3)).toBeCloseTo(0.08770664700806556, 10);
    expect(studentTwoSidedP(5.0, 6.5)).toBeCloseTo(0.0019449987787343735, 11);
    expect(studentTwoSidedP(1.0, 200)).toBeCloseTo(0.3185188479097467, 10);
    expect(studentTwoSidedP(3.2, Infinity)).toBeCloseTo(0.0013742758758316942, 12);
    expect(studentTwoSidedCritical(0.05 / 24, 6)).toBeCloseTo(5.165597185509009, 7);
    expect(studentTwoSidedCritical(0.05 / 24, Infinity)).toBeCloseTo(3.078088072842176, 7);
    expect(digamma(0.7)).toBeCloseTo(-1.2200235536979347, 10);
    expect(trigamma(2.5)).toBeCloseTo(0.49035776, 7);
    expect(tetragamma(3)).toBeCloseTo(-0.15411381, 7);
    expect(trigamma(inverseTrigamma(0.3))).toBeCloseTo(0.3, 9);
  });

  it('estimates a large prior df for alike variances and a small one for unlike ones', () => {
    const alike = Array.from({ length: 12 }, (_, k) => ({ variance: 1 + 0.01 * k, df: 7 }));
    expect(variancePrior(alike)!.d0).toBe(12 * 7); // capped at the pooled degrees of freedom
    const unlike = Array.from({ length: 12 }, (_, k) => ({ variance: 4 ** (k % 4), df: 7 }));
    expect(variancePrior(unlike)!.d0).toBeLessThan(5);
  });
});

// 24 arm parameters like a six-axis model's: 12 lengths (mm), 6 twists and 6 zero offsets (°), each kind
// with the spread of one manufacturing class (the demo's numbers: 0.25 mm, 0.02–0.03°).
const PARAMS: FleetParameterInput[] = [
  ...Array.from({ length: 12 }, (_, k) => ({ key: `J${(k >> 1) + 1}.${k % 2 ? 'd' : 'a'}`, unit: 'mm' as const, group: 'lengths' as const })),
  ...Array.from({ length: 6 }, (_, k) => ({ key: `J${k + 1}.alpha`, unit: 'deg' as const, group: 'twists' as const })),
  ...Array.from({ length: 6 }, (_, k) => ({ key: `J${k + 1}.theta`, unit: 'deg' as const, group: 'offsets' as const })),
];
const SIGMA = PARAMS.map((p) => (p.group === 'lengths' ? 0.25 : p.group === 'twists' ? 0.02 : 0.03));

function simulate(n: number, trials: number, seed: number, shift = 0) {
  const r = seededRandom(seed);
  const normal = () => Math.sqrt(-2 * Math.log(1 - r())) * Math.cos(2 * Math.PI * r());
  let falseFlags = 0, units = 0, hits = 0;
  for (let t = 0; t < trials; t++) {
    const fleet = Array.from({ length: n }, (_, i) => ({ id: `U${i}`, deviations: Object.fromEntries(PARAMS.map((p, k) => [p.key, SIGMA[k]! * normal()])) }));
    const k = t % PARAMS.length;
    if (shift) fleet[0]!.deviations[PARAMS[k]!.key]! += shift * SIGMA[k]!;
    const j = judgeFleet({ parameters: PARAMS, units: fleet });
    if (shift && j.units[0]!.flagged) hits++;
    const clean = shift ? j.units.slice(1) : j.units;
    falseFlags += clean.filter((u) => u.flagged).length;
    units += clean.length;
  }
  return { falseRate: falseFlags / units, power: hits / trials };
}

describe('fleet judgement by simulation (seeded)', () => {
  // Measured figures are printed so the README's table can be checked against a run.
  for (const [n, trials] of [[8, 300], [20, 150], [200, 12]] as const) {
    it(`flags at most 5 % of the units of homogeneous fleets of ${n}`, () => {
      const { falseRate } = simulate(n, trials, 1000 + n);
      console.log(`fleet ${n}: false-alarm rate ${(100 * falseRate).toFixed(2)} % of ${n * trials} units`);
      expect(falseRate).toBeLessThanOrEqual(0.05);
      // Not so conservative that it never fires (Bonferroni over 24 roughly independent tests ≈ 4.9 %).
      expect(falseRate).toBeGreaterThan(0.01);
    }, 120_000);
  }
  for (const [n, trials] of [[8, 240], [20, 120], [200, 24]] as const) {
    it(`flags a unit with one parameter 6 fleet σ off in ≥ 95 % of fleets of ${n}`, () => {
      const { power, falseRate } = simulate(n, trials, 2000 + n, 6);
      console.log(`fleet ${n}: 6σ unit flagged in ${(100 * power).toFixed(1)} % of ${trials} trials; the others falsely ${(100 * falseRate).toFixed(2)} %`);
      expect(power).toBeGreaterThanOrEqual(0.95);
      expect(falseRate).toBeLessThanOrEqual(0.05);
    }, 120_000);
  }

  it('never judges the base frame, and the tool only when it is a fixed fixture', () => {
    const r = seededRandom(5);
    const params: FleetParameterInput[] = [...PARAMS, { key: 'base.x', unit: 'mm', group: 'base' }, { key: 'tool.z', unit: 'mm', group: 'tool' }];
    const fleet = Array.from({ length: 10 }, (_, i) => ({ id: `U${i}`, deviations: Object.fromEntries(params.map((p) => [p.key, r() - 0.5])) }));
    fleet[3]!.deviations['base.x'] = 252;
    fleet[4]!.deviations['tool.z'] = 40;
    const loose = judgeFleet({ parameters: params, units: fleet });
    expect(loose.parameters.find((p) => p.key === 'base.x')!.judged).toBe(false);
    expect(loose.parameters.find((p) => p.key === 'tool.z')!.judged).toBe(false);
    expect(loose.units[3]!.flags).not.toContain('base.x');
    expect(loose.units[4]!.flags).not.toContain('tool.z');
    const fixture = judgeFleet({ parameters: params, units: fleet, judgeTool: true });
    expect(fixture.units[4]!.flags).toContain('tool.z');
    expect(fixture.units[3]!.flags).not.toContain('base.x');
  });

  it('draws the line where it flags: |score| > critical score exactly when the value is outside its limits', () => {
    const { units } = judgeFleet({ parameters: PARAMS, units: Array.from({ length: 12 }, (_, i) => ({ id: `U${i}`, deviations: Object.fromEntries(PARAMS.map((p, k) => [p.key, SIGMA[k]! * Math.sin(7 * i + k) * (i === 2 && k === 3 ? 9 : 1)])) })) });
    for (const u of units) {
      for (const [key, j] of Object.entries(u.parameters)) {
        const x = Math.sin(7 * Number(u.id.slice(1)) + PARAMS.findIndex((p) => p.key === key)) * SIGMA[PARAMS.findIndex((p) => p.key === key)]! * (u.id === 'U2' && key === PARAMS[3]!.key ? 9 : 1);
        expect(j.flagged).toBe(Math.abs(j.score) > u.criticalScore);
        expect(j.flagged).toBe(x < j.lower || x > j.upper);
      }
    }
    expect(units[2]!.flags).toEqual([PARAMS[3]!.key]);
  });
});
