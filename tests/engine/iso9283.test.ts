/**
 * ISO 9283:1998 clause 7.2 formulas (recalled from memory, see src/lib/engine/iso9283.ts):
 * AP_P = |barycentre − commanded|, RP_l = l̄ + 3·S_l with S_l the sample standard deviation (n − 1).
 * The expected values below are worked out by hand in closed form beside each check.
 */
import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { iso9283, repeatGroups } from '../../src/lib/engine/iso9283';
import { parseSessionCsv } from '../../src/lib/engine/session-csv';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { NOISE_MM, ROOT, r6Nominal, r6True } from './make-test-data';

describe('iso9283', () => {
  it('four visits symmetric about the commanded point: AP = 0, RP = 1.5 + 3·sqrt(1/3)', () => {
    // l = 1, 1, 2, 2 → l̄ = 1.5; Σ(l − l̄)² = 4·0.25 = 1; S_l = sqrt(1/3)
    const r = iso9283([{ label: 'A', predicted: [0, 0, 0], measured: [[1, 0, 0], [-1, 0, 0], [0, 2, 0], [0, -2, 0]] }]);
    expect(r.poses[0].ap).toBe(0);
    expect(r.poses[0].meanDistance).toBeCloseTo(1.5, 12);
    expect(r.poses[0].stdDistance).toBeCloseTo(Math.sqrt(1 / 3), 12);
    expect(r.poses[0].rp).toBeCloseTo(1.5 + 3 * Math.sqrt(1 / 3), 12);
  });

  it('three visits off the commanded point: closed-form AP and RP', () => {
    // barycentre (11, 62/3, 92/3); AP = sqrt(1 + 4/9 + 4/9) = sqrt(17)/3
    // l1 = |(0, −2/3, −2/3)| = 2√2/3, l2 = l3 = |(0, 4/3, −2/3)| = 2√5/3
    const r = iso9283([{ label: 'B', predicted: [10, 20, 30], measured: [[11, 20, 30], [11, 22, 30], [11, 20, 32]] }]);
    const p = r.poses[0];
    expect(p.barycentre[1]).toBeCloseTo(62 / 3, 12);
    expect(p.apAxes).toEqual([1, expect.closeTo(2 / 3, 12), expect.closeTo(2 / 3, 12)]);
    expect(p.ap).toBeCloseTo(Math.sqrt(17) / 3, 12);
    const l = [(2 * Math.SQRT2) / 3, (2 * Math.sqrt(5)) / 3, (2 * Math.sqrt(5)) / 3];
    const lm = (l[0] + l[1] + l[2]) / 3;
    const sl = Math.sqrt(l.reduce((s, v) => s + (v - lm) ** 2, 0) / 2);
    expect(p.meanDistance).toBeCloseTo(lm, 12);
    expect(p.rp).toBeCloseTo(lm + 3 * sl, 12);
    expect(p.rp).toBeCloseTo(2.257073406, 8); // the same number, evaluated once by hand calculator
  });

  it('overall figures are the worst pose; a single visit has AP but no RP', () => {
    const r = iso9283([
      { label: 'A', predicted: [0, 0, 0], measured: [[1, 0, 0], [-1, 0, 0], [0, 2, 0], [0, -2, 0]] },
      { label: 'B', predicted: [10, 20, 30], measured: [[11, 20, 30], [11, 22, 30], [11, 20, 32]] },
      { label: 'C', predicted: [0, 0, 0], measured: [[0, 0, 5]] },
    ]);
    expect(r.ap).toBe(5);
    expect(r.apPose).toBe('C');
    expect(r.poses[2].rp).toBeNull();
    expect(r.rpPose).toBe('A');
    expect(r.rp).toBeCloseTo(1.5 + 3 * Math.sqrt(1 / 3), 12);
    expect(iso9283([])).toEqual({ poses: [], ap: null, rp: null, apPose: null, rpPose: null });
  });

  it('on the Orrin R6-620 sample session, RP reflects the tracker noise and AP the model error', async () => {
    const r = await parseSessionCsv(readFileSync(join(ROOT, 'orrin-r6-620-session.csv'), 'utf8'), { fileName: 's', geometry: r6Nominal() });
    if (!r.ok) throw new Error('sample session must parse');
    const truth = r6True();
    const groups = repeatGroups(r.poses, (q) => forwardPoint(truth, q));
    expect(groups.map((g) => [g.label, g.measured.length])).toEqual([['P01', 6], ['P02', 6], ['P03', 6], ['P04', 6], ['P05', 6]]);
    const res = iso9283(groups);
    // Against the true geometry only noise remains: the barycentre of 6 visits lies within a few σ/√6.
    expect(res.ap!).toBeLessThan(5 * NOISE_MM);
    // Distances to the barycentre of 3-D Gaussian noise average about 1.6σ (Maxwell mean √(8/π)·σ);
    // RP = l̄ + 3 S_l lands between 1σ and 8σ for this sample size.
    expect(res.rp!).toBeGreaterThan(NOISE_MM);
    expect(res.rp!).toBeLessThan(8 * NOISE_MM);
  });
});
