import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { levenbergMarquardt as mlLevenbergMarquardt } from 'ml-levenberg-marquardt';
import { denseProblem, levenbergMarquardt } from '../../src/lib/engine/lm';
import { compileArm, createArmData } from '../../src/lib/engine/kinematics';
import { poseBuffers } from '../../src/lib/engine/jacobian';
import { fitSession } from '../../src/lib/engine/fit';
import { ArmLeastSquares, registerBase, writeBase } from '../../src/lib/engine/fit-problem';
import { gaussian, perturbed, rng, sixAxisDh, synthSession } from './helpers';

/**
 * A NIST StRD nonlinear regression file (one predictor): the parameter rows "b1 = start1 start2 certified sd",
 * the residual sum of squares and the data rows "y x" after the line starting with "Data:   y".
 */
function readStrd(file: URL) {
  const lines = readFileSync(file, 'utf8').split(/\r?\n/);
  const params = lines.map((l) => /^\s*b\d+\s*=\s*(\S+)\s+(\S+)\s+(\S+)\s+(\S+)\s*$/.exec(l)).filter((m) => m !== null);
  const rss = lines.map((l) => /^Residual Sum of Squares:\s+(\S+)/.exec(l)).find((m) => m !== null);
  const dataAt = lines.findIndex((l) => /^Data:\s+y\s+x\s*$/.test(l));
  if (!params.length || !rss || dataAt < 0) throw new Error(`${file.pathname}: not a NIST StRD nonlinear regression file`);
  const rows = lines.slice(dataAt + 1).filter((l) => l.trim()).map((l) => l.trim().split(/\s+/).map(Number));
  return {
    start1: params.map((m) => Number(m[1])),
    certified: params.map((m) => Number(m[3])),
    residualSumOfSquares: Number(rss[1]),
    y: rows.map((r) => r[0]),
    x: rows.map((r) => r[1]),
  };
}

function expDecay(x: number[], y: number[]) {
  // y = b0·exp(−b1·x) + b2
  return denseProblem(
    3,
    (b) => x.map((xi, i) => b[0] * Math.exp(-b[1] * xi) + b[2] - y[i]),
    (b) => x.flatMap((xi) => [Math.exp(-b[1] * xi), -b[0] * xi * Math.exp(-b[1] * xi), 1]),
  );
}

describe('Levenberg–Marquardt on small curve problems', () => {
  it('agrees with ml-levenberg-marquardt on an exponential decay', () => {
    const r = rng(31);
    const x = Array.from({ length: 40 }, (_, i) => i * 0.25);
    const y = x.map((xi) => 4.2 * Math.exp(-0.65 * xi) + 0.8 + 0.01 * gaussian(r));
    // ml-levenberg-marquardt (fixed damping schedule) needs a start near the basin; both start there.
    const start = [3, 0.4, 0.5];
    const ours = levenbergMarquardt(expDecay(x, y), start, { costTolerance: 1e-15, stepTolerance: 1e-15, gradientTolerance: 1e-15 });
    // Independent reference: ml-levenberg-marquardt with its analytic-Jacobian option and tight stopping.
    const ref = mlLevenbergMarquardt(
      { x, y },
      ([b0, b1, b2]: number[]) => (t: number) => b0 * Math.exp(-b1 * t) + b2,
      {
        initialValues: start, maxIterations: 2000, errorTolerance: 1e-12, damping: 1e-2,
        jacobianFunction: ([b0, b1]: number[]) => (t: number) => [Math.exp(-b1 * t), -b0 * t * Math.exp(-b1 * t), 1],
      },
    );
    expect(ours.converged).toBe(true);
    // Both reach the same least squares minimum: parameters agree to 1e-5 relative, SSR to 1e-8 relative.
    ref.parameterValues.forEach((v: number, k: number) => expect(Math.abs(ours.x[k] - v)).toBeLessThan(1e-5 * Math.max(1, Math.abs(v))));
    expect(Math.abs(2 * ours.cost - ref.parameterError) / ref.parameterError).toBeLessThan(1e-8);
    // And near the generating values (noise 0.01).
    expect(ours.x[0]).toBeCloseTo(4.2, 1);
    expect(ours.x[1]).toBeCloseTo(0.65, 1);
  });

  it('reproduces the NIST StRD Misra1a certified values', () => {
    // NIST Statistical Reference Datasets, nonlinear regression "Misra1a" (y = b1·(1 − exp(−b2·x))), read
    // from the published file test-data/reference/Misra1a.dat (source address in its README): data,
    // start 1 and the certified parameters and residual sum of squares.
    const nist = readStrd(new URL('../../test-data/reference/Misra1a.dat', import.meta.url));
    expect(nist.x).toHaveLength(14);
    expect(nist.start1).toHaveLength(2);
    const { x, y } = nist;
    const problem = denseProblem(
      2,
      (b) => x.map((xi, i) => b[0] * (1 - Math.exp(-b[1] * xi)) - y[i]),
      (b) => x.flatMap((xi) => [1 - Math.exp(-b[1] * xi), b[0] * xi * Math.exp(-b[1] * xi)]),
    );
    const res = levenbergMarquardt(problem, nist.start1, { maxIterations: 500, costTolerance: 1e-15, stepTolerance: 1e-15, gradientTolerance: 1e-15 });
    // NIST asks for agreement to about 6 significant digits at least.
    nist.certified.forEach((b, k) => expect(Math.abs(res.x[k] / b - 1), `b${k + 1}`).toBeLessThan(1e-7));
    expect(Math.abs((2 * res.cost) / nist.residualSumOfSquares - 1)).toBeLessThan(1e-7);
  });

  it('stops at the iteration limit with a plain reason', () => {
    const x = [0, 1, 2, 3, 4, 5];
    const y = x.map((t) => 3 * Math.exp(-0.5 * t) + 1);
    const res = levenbergMarquardt(expDecay(x, y), [1, 3, -2], { maxIterations: 1 });
    expect(res.converged).toBe(false);
    expect(res.stopReason).toMatch(/iteration limit/);
  });
});

describe('Levenberg–Marquardt on a synthetic arm against SciPy least_squares (MINPACK)', () => {
  it('reaches the same cost and parameters', () => {
    const nominal = sixAxisDh();
    const truth = perturbed(nominal, 41);
    const poses = synthSession(truth, 80, 0.02, 42);
    // The identified set of the engine (so both solvers face a full-rank problem).
    const report = fitSession(nominal, poses);
    const model = compileArm(nominal);
    const data = createArmData(model);
    const pb = poseBuffers(model, poses);
    const v0 = Float64Array.from(model.nominal);
    writeBase(model, v0, registerBase(model, data, v0, pb).base);
    const active = Int32Array.from(report.parameters.filter((p) => p.status === 'identified').map((p) => model.layout.byKey.get(p.key)!.index));
    const problem = new ArmLeastSquares(model, data, pb, active, v0, 'none', 1);
    const tight = { costTolerance: 1e-14, stepTolerance: 1e-14, gradientTolerance: 1e-14, maxIterations: 200 };
    const ours = levenbergMarquardt(problem, Float64Array.from(active, (j) => v0[j]), tight);

    const script = fileURLToPath(new URL('./reference/arm_least_squares.py', import.meta.url));
    const input = {
      convention: nominal.convention, prismatic: Array.from(model.prismatic), v0: Array.from(v0), active: Array.from(active),
      q: Array.from({ length: pb.count }, (_, i) => Array.from(pb.q.subarray(i * model.n, (i + 1) * model.n))),
      measured: poses.map((p) => [p.x, p.y, p.z]), jac: '2-point', ftol: 1e-14, xtol: 1e-14, gtol: 1e-14,
    };
    const run = spawnSync(process.env.PYTHON ?? 'python3', [script], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 1 << 26 });
    expect(run.status, run.stderr).toBe(0);
    const ref = JSON.parse(run.stdout) as { x: number[]; cost: number };
    // Same minimum: cost (½ SSR, SciPy's definition) within 1e-7 relative; each parameter within 1 % of
    // its standard error (SciPy uses finite differences, so the last digits differ).
    expect(Math.abs(ours.cost - ref.cost) / ref.cost).toBeLessThan(1e-7);
    const se = new Map(report.parameters.map((p) => [p.key, p]));
    Array.from(active).forEach((j, k) => {
      const info = model.layout.params[j];
      const sErr = se.get(info.key)!.standardError!;
      const seInternal = info.unit === 'deg' ? (sErr * Math.PI) / 180 : sErr;
      expect(Math.abs(ours.x[k] - ref.x[k]), info.key).toBeLessThan(0.01 * seInternal);
    });
  });
});

describe('flat Cholesky used by the solver', () => {
  it('solves SPD systems like ml-matrix CholeskyDecomposition', async () => {
    const { CholeskyDecomposition, Matrix } = await import('ml-matrix');
    const { choleskyInPlace, choleskySolveInPlace } = await import('../../src/lib/engine/linalg');
    const r = rng(33);
    for (const p of [1, 3, 12, 30]) {
      const X = Array.from({ length: p + 5 }, () => Array.from({ length: p }, () => r() - 0.5));
      const A = new Matrix(X).transpose().mmul(new Matrix(X));
      const b = Array.from({ length: p }, () => r());
      const ref = new CholeskyDecomposition(A).solve(Matrix.columnVector(b)).to1DArray();
      const L = Float64Array.from(A.to1DArray());
      expect(choleskyInPlace(L, p)).toBe(true);
      const x = Float64Array.from(b);
      choleskySolveInPlace(L, p, x);
      ref.forEach((v, k) => expect(Math.abs(x[k] - v)).toBeLessThan(1e-9 * Math.max(1, Math.abs(v))));
    }
    // Not positive definite → false.
    expect(choleskyInPlace(Float64Array.from([1, 2, 2, 1]), 2)).toBe(false);
  });
});
