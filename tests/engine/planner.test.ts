import { describe, expect, it } from 'vitest';
import { planPoses, poseSetQuality } from '../../src/lib/engine/planner';
import { fourAxisParallel, randomQ, rng, sixAxisDh } from './helpers';

const g = sixAxisDh();

function randomSets(count: number, sets: number, seed: number): number[][][] {
  const r = rng(seed);
  return Array.from({ length: sets }, () => Array.from({ length: count }, () => randomQ(g, r)));
}

describe('pose planning', () => {
  for (const index of ['O1', 'O3', 'O4'] as const) {
    it(`planned poses beat random poses on ${index}`, () => {
      const plan = planPoses(g, { count: 40, candidates: 800, seed: 5, index });
      expect(plan.q.length).toBe(40);
      // Within the joint limits.
      for (const q of plan.q) q.forEach((v, k) => {
        expect(v).toBeGreaterThanOrEqual(g.joints[k].min!);
        expect(v).toBeLessThanOrEqual(g.joints[k].max!);
      });
      const best = Math.max(...randomSets(40, 8, 91).map((qs) => poseSetQuality(g, qs)[index]));
      expect(plan.quality[index]).toBeGreaterThan(best);
      expect(plan.quality.identifiable).toBe(27);
      expect(plan.quality.parameterCount).toBe(34);
    });
  }

  it('warns in plain words about too few poses and a joint that barely moves', () => {
    const r = rng(92);
    const qs = Array.from({ length: 12 }, () => randomQ(g, r).map((v, k) => (k === 4 ? 15 + r() : v)));
    const q = poseSetQuality(g, qs);
    expect(q.warnings.some((w) => /^12 poses are fewer than the \d+ parameters/.test(w))).toBe(true);
    expect(q.warnings).toContainEqual(expect.stringMatching(/^joint J5 barely moves: its values span 0\.\d° of its 240° range$/));
    // A good plan has no such warnings.
    const plan = planPoses(g, { count: 60, candidates: 600, seed: 6 });
    expect(plan.quality.warnings).toEqual([]);
  });

  it('plans for the rank-deficient four-axis arm without failing', () => {
    const plan = planPoses(fourAxisParallel(), { count: 30, candidates: 500, seed: 7, index: 'O3' });
    expect(plan.q.length).toBe(30);
    expect(plan.quality.identifiable).toBeLessThan(plan.quality.parameterCount);
    expect(plan.quality.O3).toBeGreaterThan(0);
  });
});
