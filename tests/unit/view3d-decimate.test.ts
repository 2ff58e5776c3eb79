import { describe, expect, it } from 'vitest';
import { autoMagnification, decimatePoses, niceLength } from '../../src/components/view3d/decimate';
import type { View3DPose } from '../../src/components/view3d/types';

const pose = (i: number, e: number, role: View3DPose['role'] = 'fit'): View3DPose => ({ label: `P${i}`, role, p: [i, 2 * i, 3 * i], e: [e, 0, 0], q: [i, 0] });

describe('decimatePoses', () => {
  it('keeps everything (rounded to 1 µm) when under the limit', () => {
    const out = decimatePoses([{ label: 'A', role: 'fit', p: [1.23456789, 0, 0], e: [0.0001234, 0, 0] }], 10);
    expect(out).toEqual([{ label: 'A', role: 'fit', p: [1.235, 0, 0], e: [0, 0, 0] }]);
  });

  it('keeps every excluded pose and outlier and the largest errors, in file order, within the limit', () => {
    const poses = Array.from({ length: 10_000 }, (_, i) => pose(i, (i * 7919) % 10_000 / 1000));
    poses[17] = pose(17, 0, 'excluded');
    poses[4242] = pose(4242, 0.001, 'outlier');
    const out = decimatePoses(poses, 1000);
    expect(out.length).toBe(1000);
    const labels = out.map((p) => p.label);
    expect(labels).toContain('P17');
    expect(labels).toContain('P4242');
    const kept = new Set(labels);
    // The 499 largest errors of the rest are all there (half the budget after the two kept by role).
    const largest = poses.filter((p) => p.role === 'fit').sort((a, b) => b.e![0] - a.e![0]).slice(0, 499);
    for (const p of largest) expect(kept.has(p.label)).toBe(true);
    // Original order is kept.
    const order = out.map((p) => Number(p.label.slice(1)));
    expect([...order].sort((a, b) => a - b)).toEqual(order);
    // The even sample reaches the end of the file, not only its start.
    expect(Math.max(...out.filter((p) => p.e![0] < 5).map((p) => Number(p.label.slice(1))))).toBeGreaterThan(9000);
  });
});

describe('magnification and scale bar', () => {
  it('draws the 90th-percentile error at about 8 % of the scene, in 1-2-5 steps', () => {
    const poses = Array.from({ length: 100 }, (_, i) => pose(i, i < 99 ? 0.05 : 2));
    // 0.08 · 2000 mm / 0.05 mm = 3200 → 2000 (the largest 1-2-5 step not above it); the 2 mm outlier does not decide.
    expect(autoMagnification(poses, 2000)).toBe(2000);
    expect(autoMagnification([], 2000)).toBe(1);
    expect(niceLength(730)).toBe(500);
    expect(niceLength(0.37)).toBe(0.2);
    expect(niceLength(100)).toBe(100);
  });
});
