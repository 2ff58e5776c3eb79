import { describe, expect, it } from 'vitest';
import { checkGeometry, fitSession } from '../../src/lib/engine/fit';
import { errorStats } from '../../src/lib/engine/stats';
import { assignRoles, kFoldAssignment } from '../../src/lib/engine/validation';
import { EngineInputError, type SessionPose } from '../../src/lib/engine/types';
import { perturbed, sixAxisDh, synthSession } from './helpers';

const nominal = sixAxisDh();
const truth = perturbed(nominal, 81);
const roleOpts = { holdout: 0, seed: 1, useSplitColumn: true, exclude: [] as string[] };

describe('error statistics', () => {
  it('rms, mean, max and the 95th percentile by linear interpolation', () => {
    // NumPy's default percentile ('linear', Hyndman & Fan type 7): rank h = (n − 1)·0.95 = 2.85 → 3.85.
    const st = errorStats([4, 1, 3, 2]);
    expect({ ...st, p95: 0 }).toEqual({ n: 4, rms: Math.sqrt(7.5), mean: 2.5, max: 4, p95: 0 });
    expect(st.p95).toBeCloseTo(3.85, 12);
    expect(errorStats([])).toEqual({ n: 0, rms: 0, mean: 0, max: 0, p95: 0 });
    const many = Array.from({ length: 101 }, (_, i) => i / 100);
    expect(errorStats(many).p95).toBeCloseTo(0.95, 12);
  });
});

describe('hold-out, exclusion and k-fold assignment', () => {
  const poses: SessionPose[] = synthSession(truth, 40, 0.02, 82).map((p, i) => ({ ...p, label: `P${1 + (i % 20)}` }));

  it('split column marks validation poses', () => {
    const withSplit = poses.map((p, i) => ({ ...p, split: (i % 4 === 0 ? 'validate' : 'fit') as 'fit' | 'validate' }));
    const roles = assignRoles(withSplit, { ...roleOpts, holdout: 0.5 });
    roles.forEach((r, i) => expect(r).toBe(i % 4 === 0 ? 'holdout' : 'fit'));
    // Ignored when asked to.
    expect(assignRoles(withSplit, { ...roleOpts, useSplitColumn: false }).every((r) => r === 'fit')).toBe(true);
  });

  it('seeded random fraction keeps repeat visits of a label together and is reproducible', () => {
    const a = assignRoles(poses, { ...roleOpts, holdout: 0.25, seed: 7 });
    const b = assignRoles(poses, { ...roleOpts, holdout: 0.25, seed: 7 });
    const c = assignRoles(poses, { ...roleOpts, holdout: 0.25, seed: 8 });
    expect(a).toEqual(b);
    expect(a).not.toEqual(c);
    const held = new Set(poses.filter((_, i) => a[i] === 'holdout').map((p) => p.label));
    expect(held.size).toBe(5); // 25 % of 20 labels
    poses.forEach((p, i) => expect(a[i] === 'holdout').toBe(held.has(p.label)));
  });

  it('excludes by label (every visit) or by line, and names an unknown one', () => {
    const roles = assignRoles(poses, { ...roleOpts, exclude: ['P3', `line:${poses[10].line}`] });
    expect(roles.filter((r) => r === 'excluded').length).toBe(3);
    expect(() => assignRoles(poses, { ...roleOpts, exclude: ['P99'] })).toThrow(/no pose labelled "P99" to exclude/);
    expect(() => assignRoles(poses, { ...roleOpts, exclude: ['line:999'] })).toThrow(/no pose on line 999/);
  });

  it('k-fold assignment is balanced and label-grouped', () => {
    const labels = poses.map((p) => p.label);
    const folds = kFoldAssignment(labels, 5, 1);
    const counts = [0, 0, 0, 0, 0];
    folds.forEach((f) => counts[f]++);
    expect(counts).toEqual([8, 8, 8, 8, 8]);
    labels.forEach((l, i) => labels.forEach((m, j) => l === m && expect(folds[i]).toBe(folds[j])));
  });
});

describe('outliers, robust loss, exclusion and cross-validation in a fit', () => {
  const clean = synthSession(truth, 120, 0.02, 83);
  const bad = clean.map((p, i) => (i === 17 ? { ...p, x: p.x + 0.8, z: p.z - 0.5 } : p));

  it('flags a pose with a gross error and the re-fit without it is clean', () => {
    const rep = fitSession(nominal, bad);
    expect(rep.outliers).toEqual([bad[17].label]);
    const pose = rep.poses[17];
    expect(pose.outlier).toBe(true);
    // The gross error also inflates σ in this fit, so its standardised residual is ~10 rather than ~27.
    expect(pose.standardised!).toBeGreaterThan(5);
    const refit = fitSession(nominal, bad, { exclude: [bad[17].label] });
    expect(refit.outliers).toEqual([]);
    expect(refit.poses[17].role).toBe('excluded');
    // The excluded pose is still evaluated, as a prediction, and still stands out.
    expect(refit.poses[17].standardised!).toBeGreaterThan(15);
    expect(refit.residualSigmaMm).toBeLessThan(rep.residualSigmaMm);
    expect(refit.residualSigmaMm).toBeLessThan(0.023);
  });

  it('standardised residuals average to one on clean data', () => {
    const rep = fitSession(nominal, clean);
    const s = rep.poses.map((p) => p.standardised!);
    const meanSq = s.reduce((a, b) => a + b * b, 0) / s.length;
    // Σ eᵀ(I − H)⁻¹e = SSR-like sum with expectation 3n·σ² for studentised residuals: mean s² ≈ 1.
    expect(meanSq).toBeGreaterThan(0.85);
    expect(meanSq).toBeLessThan(1.15);
    expect(rep.outliers).toEqual([]);
  });

  it('a Huber loss limits the pull of gross errors', () => {
    const several = clean.map((p, i) => (i % 15 === 3 ? { ...p, y: p.y + 1.5 } : p));
    const plain = fitSession(nominal, several, { holdout: 0.25, seed: 2 });
    const huber = fitSession(nominal, several, { holdout: 0.25, seed: 2, robust: 'huber', robustScaleMm: 0.05 });
    expect(huber.converged).toBe(true);
    const rmsClean = (r: typeof plain) => {
      const e = r.poses.filter((p, i) => p.role === 'holdout' && i % 15 !== 3).map((p) => p.errorAfter);
      return Math.sqrt(e.reduce((a, b) => a + b * b, 0) / e.length);
    };
    expect(rmsClean(huber)).toBeLessThan(0.7 * rmsClean(plain));
  });

  it('k-fold cross-validation gives one statistic per fold near the noise level', () => {
    const rep = fitSession(nominal, clean, { kFold: 5 });
    const cv = rep.statistics.crossValidation!;
    expect(cv.k).toBe(5);
    expect(cv.folds.length).toBe(5);
    expect(cv.folds.reduce((a, f) => a + f.n, 0)).toBe(120);
    expect(cv.rms).toBeGreaterThan(0.02 * Math.sqrt(3) * 0.8);
    expect(cv.rms).toBeLessThan(0.02 * Math.sqrt(3) * 1.4);
  });

  it('refuses a session with fewer fit poses than identifiable parameters', () => {
    expect(() => fitSession(nominal, clean.slice(0, 20))).toThrow(EngineInputError);
    expect(() => fitSession(nominal, clean.slice(0, 20))).toThrow(/20 fit poses are fewer than the 27 identifiable parameters/);
  });

  it('refuses a joint count mismatch naming the line', () => {
    const wrong = clean.map((p, i) => (i === 5 ? { ...p, q: p.q.slice(0, 5) } : p));
    expect(() => fitSession(nominal, wrong)).toThrow(new RegExp(`line ${clean[5].line}, field q: pose "${clean[5].label}" has 5 joint values but the geometry has 6 joints`));
  });

  it('reports the calibrated geometry at full precision and checks it against the session', () => {
    const rep = fitSession(nominal, clean, { holdout: 0.2 });
    expect(rep.calibrated.base).toBeDefined();
    expect(rep.calibrated.joints[1].beta).toBeDefined();
    expect(rep.calibrated.joints[0].beta).toBeUndefined();
    const check = checkGeometry(rep.calibrated, clean);
    expect(check.registered).toBe(false);
    expect(check.stats.rms).toBeLessThan(0.045);
    const nominalCheck = checkGeometry(nominal, clean);
    expect(nominalCheck.registered).toBe(true);
    // Registered nominal: the same "before" figure as the fit report gives for all poses.
    expect(nominalCheck.stats.rms).toBeGreaterThan(0.5);
  });
});

describe('fit options', () => {
  const poses = synthSession(truth, 80, 0.02, 84);

  it('identifies only the chosen groups and says why the others are fixed', () => {
    const rep = fitSession(nominal, poses, { groups: ['offsets', 'tool'] });
    const ids = rep.parameters.filter((p) => p.status === 'identified');
    expect(ids.every((p) => p.group === 'offsets' || p.group === 'tool')).toBe(true);
    expect(ids.length).toBeGreaterThan(3);
    const a2 = rep.parameters.find((p) => p.key === 'J2.a')!;
    expect(a2.status).toBe('fixed');
    expect(a2.reason).toBe('not in the chosen parameter groups');
    expect(rep.parameters.find((p) => p.key === 'base.x')!.reason).toMatch(/registered base/);
    // Fewer parameters explain less of the invented errors than the full set.
    expect(rep.statistics.fit.after.rms).toBeGreaterThan(fitSession(nominal, poses).statistics.fit.after.rms);
  });

  it('reports progress, and an unconverged stop when the iteration limit is hit', () => {
    const seen: number[] = [];
    const rep = fitSession(nominal, poses, { maxIterations: 1, onIteration: (it) => seen.push(it.iteration) });
    expect(seen).toEqual([0, 1]);
    expect(rep.converged).toBe(false);
    expect(rep.stopReason).toMatch(/iteration limit/);
    expect(rep.options).not.toHaveProperty('onIteration');
  });

  it('refuses bad options with the field named', () => {
    expect(() => fitSession(nominal, poses, { holdout: 0.95 })).toThrow(/field holdout: hold-out fraction 0.95 is out of range \(expected a number from 0 to 0.9\)/);
    expect(() => fitSession(nominal, poses, { kFold: 1 })).toThrow(/field kFold/);
    expect(() => fitSession(nominal, poses, { groups: ['lengths', 'wrong' as never] })).toThrow(/unknown parameter group "wrong"/);
  });

  it('a Cauchy loss converges on clean data to nearly the plain fit', () => {
    const plain = fitSession(nominal, poses);
    const cauchy = fitSession(nominal, poses, { robust: 'cauchy', robustScaleMm: 0.1 });
    expect(cauchy.converged).toBe(true);
    expect(Math.abs(cauchy.statistics.fit.after.rms - plain.statistics.fit.after.rms)).toBeLessThan(0.003);
  });
});
