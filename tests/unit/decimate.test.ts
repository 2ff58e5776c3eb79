import { describe, expect, it } from 'vitest';
import type { PoseResidual } from '../../src/lib/engine/fit';
import { decimate, decimateIndices } from '../../src/lib/shared/decimate';
import { CHART_POSE_LIMIT, chartPoses, summarisePoses, summariseReport } from '../../src/lib/shared/fit-summary';

/** A seeded generator (mulberry32) so the series is the same on every run. */
function rng(seed: number) {
  let a = seed;
  return () => {
    a = (a + 0x6d2b79f5) | 0;
    let t = Math.imul(a ^ (a >>> 15), 1 | a);
    t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

describe('decimateIndices', () => {
  it('keeps every index at or below the limit', () => {
    expect(decimateIndices(5, 5)).toEqual([0, 1, 2, 3, 4]);
    expect(decimateIndices(0, 10)).toEqual([]);
  });

  it('keeps the forced items, the largest scores and an even sample, in order, within the limit', () => {
    const r = rng(7);
    const n = 100_000;
    const score = Array.from({ length: n }, () => r());
    const forced = new Set([3, 50_000, 99_998]);
    const idx = decimateIndices(n, 2000, { keep: (i) => forced.has(i), score: (i) => score[i]! });
    expect(idx).toHaveLength(2000);
    for (const f of forced) expect(idx).toContain(f);
    // In original order, no duplicates.
    for (let k = 1; k < idx.length; k++) expect(idx[k]!).toBeGreaterThan(idx[k - 1]!);
    // The 998 largest scores (half of what is left after the forced three) are all kept.
    const kept = new Set(idx);
    const largest = score.map((s, i) => [s, i] as const).filter(([, i]) => !forced.has(i)).sort((a, b) => b[0] - a[0]).slice(0, 998);
    for (const [, i] of largest) expect(kept.has(i)).toBe(true);
    // The even sample spans the whole series.
    expect(idx[0]).toBeLessThan(200);
    expect(idx.at(-1)!).toBeGreaterThan(n - 200);
  });

  it('never exceeds the limit even when more items are forced than fit', () => {
    const idx = decimateIndices(1000, 10, { keep: () => true });
    expect(idx).toEqual([0, 1, 2, 3, 4, 5, 6, 7, 8, 9]);
  });

  it('decimate returns the items themselves', () => {
    const items = Array.from({ length: 100 }, (_, i) => ({ i, v: i === 42 ? 1000 : 0 }));
    const out = decimate(items, 4, { score: (x) => x.v });
    expect(out).toHaveLength(4);
    expect(out.map((x) => x.i)).toContain(42);
  });
});

describe('summarisePoses (the fit summary at 100 000 poses)', () => {
  const r = rng(11);
  const n = 100_000;
  const poses: PoseResidual[] = Array.from({ length: n }, (_, i) => {
    const a: [number, number, number] = [r() * 0.02, r() * 0.02, r() * 0.02];
    const role = i % 97 === 0 ? 'excluded' : i % 5 === 0 ? 'holdout' : 'fit';
    return { label: `P${i}`, line: i + 2, role, before: [a[0] * 10, a[1] * 10, a[2] * 10], after: a, errorBefore: Math.hypot(...a) * 10, errorAfter: Math.hypot(...a), standardised: role === 'fit' ? r() * 3 : null, outlier: false };
  });
  // A handful of large residuals anywhere in the file, and two flagged outliers with small ones.
  const big = [17, 31_337, 77_777, 99_999];
  for (const k of big) Object.assign(poses[k]!, { role: 'fit', errorAfter: 5 + k / 1e5, errorBefore: 6, after: [5, 0, 0] });
  Object.assign(poses[500]!, { role: 'fit', outlier: true, standardised: 9 });
  Object.assign(poses[60_001]!, { role: 'fit', outlier: true, standardised: 8 });
  const s = summarisePoses(poses);

  it('sends at most CHART_POSE_LIMIT poses with the largest residuals and every outlier', () => {
    const chart = chartPoses(s.chart);
    expect(chart.length).toBeLessThanOrEqual(CHART_POSE_LIMIT);
    const labels = new Set(chart.map((c) => c.label));
    for (const k of big) expect(labels.has(`P${k}`)).toBe(true);
    expect(labels.has('P500') && labels.has('P60001')).toBe(true);
    // The largest residuals after calibration (the 500 largest) and before (the 250 largest) are all drawn.
    const ranked = (f: (p: PoseResidual) => number, k: number) => poses.map((p, i) => [f(p), i] as const).sort((a, b) => b[0] - a[0]).slice(0, k);
    for (const [, i] of ranked((p) => p.errorAfter, 500)) expect(labels.has(`P${i}`)).toBe(true);
    for (const [, i] of ranked((p) => p.errorBefore, 250)) expect(labels.has(`P${i}`)).toBe(true);
    // Index is the 1-based order in the file.
    expect(chart.find((c) => c.label === 'P31337')!.index).toBe(31_338);
    expect(chart.filter((c) => c.outlier).map((c) => c.label)).toEqual(['P500', 'P60001']);
  });

  it('counts every non-excluded pose in the histogram and lists the suspects', () => {
    expect(s.count).toBe(n);
    expect(s.fit + s.holdout + s.excluded).toBe(n);
    const used = n - s.excluded;
    expect(s.histogram.reduce((a, h) => a + h.after, 0)).toBe(used);
    expect(s.histogram.reduce((a, h) => a + h.before, 0)).toBe(used);
    expect(s.suspects.slice(0, 2).map((p) => p.label)).toEqual(['P500', 'P60001']);
    expect(s.suspects.length).toBeLessThanOrEqual(2 + 8);
  });

  it('keeps the stored summary small (well under the 200 kB of the summary API)', () => {
    const bytes = Buffer.byteLength(JSON.stringify(s));
    // The rest of a report (parameters, correlation matrix, iterations) is a few tens of kB.
    expect(bytes).toBeLessThan(120_000);
    // Legacy reports with inline poses get the same shape.
    const legacy = summariseReport({ poses, outliers: [] } as never);
    expect(legacy).not.toHaveProperty('poses');
    expect(legacy.poseSummary.count).toBe(n);
  });
});
