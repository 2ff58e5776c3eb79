/**
 * The fleet judgement's fast leave-one-out reference against the direct computation it replaces: sort the
 * other units' values, screen them (`screened`), then mean and sample variance of what is kept.
 */
import { describe, expect, it } from 'vitest';
import { LeaveOneOut, screened } from '../../src/lib/engine/fleet-judgement';
import { normalVariate, seededRandom } from '../../src/lib/engine/random';

function direct(values: number[], i: number) {
  const others = values.filter((_, j) => j !== i);
  const { kept } = screened(others);
  const mean = kept.reduce((a, b) => a + b, 0) / kept.length;
  const variance = kept.length > 1 ? kept.reduce((a, b) => a + (b - mean) ** 2, 0) / (kept.length - 1) : 0;
  return { m: kept.length, mean, variance };
}

function fleets() {
  const r = seededRandom(20261202);
  const out: { name: string; values: number[] }[] = [];
  for (const n of [2, 3, 4, 5, 8, 9, 40, 41, 301]) {
    // Normal spread around an offset, with a few far-off units (set aside by the screening).
    const values = Array.from({ length: n }, () => 0.25 + 0.08 * normalVariate(r));
    if (n > 6) values[3] = 3.5;
    if (n > 30) values[n - 1] = -2.75;
    out.push({ name: `normal, ${n} units`, values });
  }
  // Ties and a zero MAD: most units share one value (the others are then all kept).
  out.push({ name: 'ties, MAD 0', values: [0.1, 0.1, 0.1, 0.1, 0.1, 0.3, -0.2, 0.1] });
  out.push({ name: 'rounded values with many ties', values: Array.from({ length: 60 }, () => Math.round(10 * normalVariate(r)) / 100) });
  out.push({ name: 'all equal', values: [0.02, 0.02, 0.02, 0.02, 0.02] });
  return out;
}

describe('leave-one-out reference of the fleet judgement', () => {
  for (const { name, values } of fleets()) {
    it(`equals screening the other units directly: ${name}`, () => {
      const loo = new LeaveOneOut(values);
      for (let i = 0; i < values.length; i++) {
        const want = direct(values, i);
        const got = loo.without(values[i]!, 1);
        expect(got, `unit ${i}`).not.toBeNull();
        // The kept set is the same set (same size), so mean and variance agree to rounding.
        expect(got!.m, `unit ${i}: kept`).toBe(want.m);
        expect(Math.abs(got!.mean - want.mean), `unit ${i}: mean`).toBeLessThanOrEqual(1e-12 * Math.max(1, Math.abs(want.mean)));
        expect(Math.abs(got!.variance - want.variance), `unit ${i}: variance`).toBeLessThanOrEqual(1e-11 * Math.max(1e-12, want.variance));
        if (want.variance === 0) expect(got!.variance).toBe(0);
      }
    });
  }

  it('refuses a reference with fewer kept values than asked for', () => {
    const loo = new LeaveOneOut([0.1, 0.2, 0.3]);
    expect(loo.without(0.1, 3)).toBeNull();
    expect(loo.without(0.1, 2)).toMatchObject({ m: 2 });
  });
});
