/**
 * Parallel consecutive axes without β in the nominal: the engine adds Hayati's β on its own and fits as
 * well as a reference that fits β (SciPy's least_squares, method 'lm', via tests/engine/reference/
 * arm_least_squares.py, with its own NumPy forward kinematics and finite-difference Jacobian).
 */
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { fitSession } from '../../src/lib/engine/fit';
import { compileArm, jointsToInternal } from '../../src/lib/engine/kinematics';
import { geometryToVector } from '../../src/lib/engine/parameters';
import { parallelAxes } from '../../src/lib/engine/warnings';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { perturbed, sixAxisDh, sixAxisMdh, synthSession } from './helpers';

function withoutBeta(g: ArmGeometry): ArmGeometry {
  return { ...g, joints: g.joints.map(({ beta: _b, ...j }) => j) };
}

/** SciPy reference: fit the keys `keys` from the start geometry `start` (its vector), return the RMS 3-D error. */
function scipyRms(start: ArmGeometry, keys: string[], poses: ReturnType<typeof synthSession>): number {
  const model = compileArm(start);
  const v0 = geometryToVector(start);
  const active = keys.map((k) => model.layout.byKey.get(k)!.index);
  const q = poses.map((p) => {
    const out = new Float64Array(model.n);
    jointsToInternal(model, p.q, out);
    return Array.from(out);
  });
  const script = fileURLToPath(new URL('./reference/arm_least_squares.py', import.meta.url));
  const input = {
    convention: start.convention, prismatic: Array.from(model.prismatic), v0: Array.from(v0), active,
    q, measured: poses.map((p) => [p.x, p.y, p.z]), jac: '2-point',
  };
  const run = spawnSync(process.env.PYTHON ?? 'python3', [script], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 1 << 26 });
  expect(run.status, run.stderr).toBe(0);
  const ref = JSON.parse(run.stdout) as { cost: number };
  // cost = ½ Σ r² over 3 coordinates per pose → RMS of the 3-D error = √(2·cost / poses).
  return Math.sqrt((2 * ref.cost) / poses.length);
}

describe('parallel axes are found from the geometry', () => {
  it('DH: J2 ∥ J3 puts β on J2; MDH puts it on J3; a 3° misalignment is nearly parallel, 10° is not', () => {
    expect(parallelAxes(withoutBeta(sixAxisDh())).map((p) => p.reason)).toEqual(['added β to J2 because J2 ∥ J3']);
    expect(parallelAxes(withoutBeta(sixAxisMdh())).map((p) => p.key)).toEqual(['J3.beta']);
    const g = withoutBeta(sixAxisDh());
    g.joints[1].alpha = 3;
    expect(parallelAxes(g).map((p) => p.reason)).toEqual(['added β to J2 because J2 nearly ∥ (3.00° apart) J3']);
    g.joints[1].alpha = 10;
    expect(parallelAxes(g)).toEqual([]);
  });
});

describe('a nominal with parallel axes and no β', () => {
  for (const [name, arm] of [['DH', sixAxisDh], ['MDH', sixAxisMdh]] as const) {
    it(`${name}: the engine adds β and fits within 1.5× of SciPy fitting β; without β it fits far worse and says so`, () => {
      const listed = arm();
      const truth = perturbed(listed, 91);
      // A real tilt between the parallel axes (the reason β exists).
      const carrier = listed.convention === 'dh' ? 1 : 2;
      truth.joints[carrier].beta = 0.08;
      const poses = synthSession(truth, 150, 0.02, 92);
      const nominal = withoutBeta(listed);

      const auto = fitSession(nominal, poses, { noiseMm: 0.02 });
      const key = `J${carrier + 1}.beta`;
      expect(auto.betaAdded.map((b) => b.key)).toEqual([key]);
      expect(auto.betaAdded[0].reason).toBe(`added β to J${carrier + 1} because J2 ∥ J3`);
      expect(auto.warnings.find((w) => w.code === 'beta-added')?.message).toContain(`Added β to J${carrier + 1} because J2 ∥ J3`);
      expect(auto.calibrated.joints[carrier].beta).toBeDefined();
      expect(auto.parameters.find((p) => p.key === key)?.status).toBe('identified');
      expect(auto.warnings.some((w) => w.code === 'residual-above-noise')).toBe(false);

      // Reference with β: SciPy from the nominal (β = 0 listed) and the engine's calibrated base.
      const start: ArmGeometry = { ...listed, joints: listed.joints.map((j, i) => (i === carrier ? { ...j, beta: 0 } : j)), base: auto.calibrated.base };
      const keys = auto.parameters.filter((p) => p.status === 'identified').map((p) => p.key);
      const ref = scipyRms(start, keys, poses);
      expect(auto.statistics.fit.after.rms).toBeLessThan(1.5 * ref);

      // Without β (the old behaviour): far above the noise, and the report says so with the cause.
      const plain = fitSession(nominal, poses, { noiseMm: 0.02, autoBeta: false });
      expect(plain.statistics.fit.after.rms).toBeGreaterThan(1.5 * ref);
      const w = plain.warnings.find((x) => x.code === 'residual-above-noise');
      expect(w?.severity).toBe('serious');
      expect(w?.advice).toContain('parallel axes without β (J2 ∥ J3');
    });
  }
});
