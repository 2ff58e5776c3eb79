/**
 * Cross-validation repeats the identifiability selection inside each fold. Reference (closed form of what
 * a fold means): a fold's held-out error equals the error of an independent fit on that fold's training
 * poses alone (fitSession, which makes its own selection), predicting the held-out poses.
 * The case is built so the selections differ: J6 moves only in fold 1's poses, so on fold 2's poses
 * alone J5's link parameters cannot be told from the tool point and must be held at nominal.
 */
import { describe, expect, it } from 'vitest';
import { fitSession } from '../../src/lib/engine/fit';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { kFoldAssignment } from '../../src/lib/engine/validation';
import type { SessionPose } from '../../src/lib/engine/types';
import { gaussian, perturbed, randomQ, rng, sixAxisDh } from './helpers';

describe('k-fold cross-validation', () => {
  it('a fold equals a fit on its training poses alone, with that fit\'s own parameter selection', () => {
    const nominal = sixAxisDh();
    const truth = perturbed(nominal, 31);
    truth.joints[5].theta += 0.3;
    const labels = Array.from({ length: 120 }, (_, k) => `P${k + 1}`);
    const folds = kFoldAssignment(labels, 2, 1);
    const r = rng(32);
    const poses: SessionPose[] = labels.map((label, k) => {
      const q = randomQ(nominal, r);
      if (folds[k] !== 0) q[5] = 0;
      const p = forwardPoint(truth, q);
      return { label, line: k + 2, q, x: p[0] + 0.02 * gaussian(r), y: p[1] + 0.02 * gaussian(r), z: p[2] + 0.02 * gaussian(r) };
    });
    const rep = fitSession(nominal, poses, { kFold: 2, seed: 1 });
    const ids = (r0: typeof rep) => r0.parameters.filter((p) => p.status === 'identified').map((p) => p.key);
    // On all poses J5's link is identified; on fold 2's poses alone (J6 still) it merges with the tool point.
    expect(ids(rep)).toEqual(expect.arrayContaining(['J5.a', 'J5.alpha', 'J5.d', 'J5.theta']));

    // Fold 1 is tested on the poses of fold index 0, trained on the rest (J6 still).
    const train = poses.filter((_, k) => folds[k] !== 0), test = poses.filter((_, k) => folds[k] === 0);
    const direct = fitSession(nominal, train);
    expect(ids(direct).filter((k) => k.startsWith('J5.'))).toEqual([]);
    const e = test.map((p) => {
      const q = forwardPoint(direct.calibrated, p.q);
      return Math.hypot(p.x - q[0], p.y - q[1], p.z - q[2]);
    });
    const rms = Math.sqrt(e.reduce((a, b) => a + b * b, 0) / e.length);
    const fold = rep.statistics.crossValidation!.folds[0];
    expect(fold.n).toBe(test.length);
    expect(Math.abs(fold.rms - rms) / rms).toBeLessThan(1e-3);
  });
});
