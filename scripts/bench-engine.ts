/**
 * Engine benchmark: fit time in-process for an invented six-axis arm with the full parameter set at
 * 60, 500, 5 000 and 20 000 poses, side by side with the same least squares problem solved by
 * ml-levenberg-marquardt (analytic Jacobian option) and by SciPy's least_squares (method 'lm', MINPACK,
 * analytic vectorised NumPy Jacobian). Run: npx tsx scripts/bench-engine.ts [--quick]
 *
 * "Offsetry fit" is the whole fitSession (registration, identifiability, LM, uncertainty, residuals
 * and standardised residuals); "Offsetry LM" its identification part. The references solve only the
 * LM problem, from the same start (registered base) over the same identified parameters.
 * Times: wall clock, median of several runs after a warm-up, and process CPU time (user + system) of the
 * fastest run — on a shared machine CPU time is the steadier figure. SciPy: best of its repeats, wall and
 * CPU (time.process_time; NumPy may use more than one thread, which CPU time counts in full).
 */
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { cpus, loadavg } from 'node:os';
import { levenbergMarquardt as mlLevenbergMarquardt } from 'ml-levenberg-marquardt';
import { fitSession } from '../src/lib/engine/fit';
import { registerBase, writeBase } from '../src/lib/engine/fit-problem';
import { compileArm, createArmData, forwardKinematics, setParameters } from '../src/lib/engine/kinematics';
import { pointJacobian, poseBuffers, predictPoints } from '../src/lib/engine/jacobian';
import type { ArmGeometry, SessionPose } from '../src/lib/engine/types';
import { normalVariate, seededRandom } from '../src/lib/engine/random';
import { sixAxisDh } from '../tests/support/arms';

const quick = process.argv.includes('--quick');
const SIZES = quick ? [60, 500, 5000] : [60, 500, 5000, 20000];

// Invented six-axis arm (Offsetry test arm), not any product's parameters.
// The engine tests' invented six-axis DH arm (tests/support/arms.ts), under the benchmark's name.
const nominal: ArmGeometry = { ...sixAxisDh(), name: 'Bench arm BA-6' };

const random = seededRandom;

function truthArm(): ArmGeometry {
  const r = random(7);
  const s = () => 2 * r() - 1;
  return {
    ...nominal,
    joints: nominal.joints.map((j) => ({ ...j, a: j.a + 0.8 * s(), alpha: j.alpha + 0.08 * s(), d: j.d + 0.8 * s(), theta: j.theta + 0.08 * s(), ...(j.beta !== undefined ? { beta: 0.05 * s() } : {}) })),
    base: { x: 2500, y: -800, z: -300, rx: 0.3, ry: -0.2, rz: 35 },
    tool: { ...nominal.tool!, x: 12.4, y: -8.3, z: 135.2 },
  };
}

function session(count: number): SessionPose[] {
  const truth = truthArm();
  const model = compileArm(truth);
  const data = createArmData(model);
  const r = random(count);
  const g = () => normalVariate(r);
  const q = new Float64Array(6);
  return Array.from({ length: count }, (_, k) => {
    const deg = truth.joints.map((j) => j.min! + (j.max! - j.min!) * r());
    deg.forEach((v, i) => (q[i] = (v * Math.PI) / 180));
    forwardKinematics(model, data, q);
    const p = data.point;
    return { label: `P${k + 1}`, line: k + 2, q: deg, x: p[0] + 0.02 * g(), y: p[1] + 0.02 * g(), z: p[2] + 0.02 * g() };
  });
}

const median = (xs: number[]) => xs.slice().sort((a, b) => a - b)[Math.floor(xs.length / 2)];

function runScipy(input: unknown): { seconds: number; cpu_seconds: number; cost: number; nfev: number } | string {
  const env = { ...process.env };
  delete env.OPENBLAS_CORETYPE;
  delete env.OPENBLAS_L2_SIZE;
  const script = fileURLToPath(new URL('../tests/engine/reference/arm_least_squares.py', import.meta.url));
  const run = spawnSync(process.env.PYTHON ?? 'python3', [script], { input: JSON.stringify(input), encoding: 'utf8', env, maxBuffer: 1 << 28 });
  if (run.status !== 0) return `failed: ${(run.stderr || run.error?.message || '').trim().split('\n').pop()}`;
  return JSON.parse(run.stdout);
}

function runMl(poses: SessionPose[], v0: Float64Array, active: number[]): { ms: number; rms: number; iterations: number; cost: number } {
  const model = compileArm(nominal);
  const data = createArmData(model);
  const pb = poseBuffers(model, poses);
  const n = pb.count;
  const x = Array.from({ length: 3 * n }, (_, i) => i);
  const y = Array.from(pb.measured);
  const v = Float64Array.from(v0);
  const pred = new Float64Array(3 * n);
  const J = new Float64Array(3 * active.length);
  const rows = new Float64Array(3 * n * active.length);
  const cols = Int32Array.from(active);
  const load = (params: number[]) => active.forEach((j, k) => (v[j] = params[k]));
  const t0 = performance.now();
  const res = mlLevenbergMarquardt(
    { x, y },
    (params: number[]) => {
      load(params);
      predictPoints(model, data, v, pb, pred);
      return (i: number) => pred[i];
    },
    {
      initialValues: active.map((j) => v0[j]),
      maxIterations: 50,
      errorTolerance: 1e-6,
      jacobianFunction: (params: number[]) => {
        load(params);
        setParameters(model, data, v);
        const p = active.length;
        for (let i = 0; i < n; i++) {
          forwardKinematics(model, data, pb.q, { offset: i * model.n, withDerivatives: true });
          pointJacobian(model, data, cols, J);
          for (let k = 0; k < p; k++) for (let r = 0; r < 3; r++) rows[(3 * i + r) * p + k] = J[3 * k + r];
        }
        return (i: number) => Array.from(rows.subarray(i * p, i * p + p));
      },
    },
  );
  const ms = performance.now() - t0;
  return { ms, rms: Math.sqrt(res.parameterError / n), iterations: res.iterations, cost: res.parameterError / 2 };
}

const pad = (s: string, w: number) => s.padStart(w);
const cpuMs = () => {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1000;
};
const load = loadavg()[0];
console.log(`Offsetry engine benchmark — ${cpus().length} CPU(s) ${cpus()[0]?.model ?? ''}, Node ${process.version}, load average ${load.toFixed(1)}`);
console.log('six-axis DH arm, full default parameter set (34 candidates, 27 identifiable), tracker noise 0.02 mm');
const head = ['poses', 'fit ms', 'fit cpu', 'LM ms', 'iter', 'rms mm', 'SciPy ms', 'SciPy cpu', 'wall ratio', 'cpu ratio', 'Δcost', 'ml-LM ms', 'ml iter', 'ml Δcost'];
console.log(head.map((h, i) => pad(h, i === 0 ? 6 : 10)).join(' '));
// Warm-up so the JIT has compiled the hot paths before timing, as in a long-running server: fits of mixed
// sizes until at least 40 fits and 1.5 s have gone by (5 fits left the once-per-fit code interpreted).
{
  const warm = [session(60), session(500), session(2000)];
  const until = performance.now() + 1500;
  for (let w = 0; w < 40 || performance.now() < until; w++) fitSession(nominal, warm[w % warm.length]!);
}
for (const N of SIZES) {
  const poses = session(N);
  const reps = N <= 500 ? 25 : N <= 5000 ? 9 : 5;
  const total: number[] = [], lm: number[] = [];
  let cpuBest = Infinity;
  let rep = fitSession(nominal, poses);
  for (let k = 0; k < reps; k++) {
    const c0 = cpuMs();
    rep = fitSession(nominal, poses);
    cpuBest = Math.min(cpuBest, cpuMs() - c0);
    total.push(rep.timing.totalMs);
    lm.push(rep.timing.identificationMs);
  }
  const fitMs = median(total);
  // Same problem for the references: registered base, identified parameters.
  const model = compileArm(nominal);
  const data = createArmData(model);
  const pb = poseBuffers(model, poses);
  const v0 = Float64Array.from(model.nominal);
  writeBase(model, v0, registerBase(model, data, v0, pb).base);
  const active = rep.parameters.filter((p) => p.status === 'identified').map((p) => model.layout.byKey.get(p.key)!.index);
  const ourCost = rep.iterations[rep.iterations.length - 1].cost;
  const scipy = runScipy({
    convention: 'dh', prismatic: Array.from(model.prismatic), v0: Array.from(v0), active,
    q: Array.from({ length: N }, (_, i) => Array.from(pb.q.subarray(6 * i, 6 * i + 6))),
    measured: poses.map((p) => [p.x, p.y, p.z]), jac: 'analytic', repeat: N <= 5000 ? 3 : 2,
  });
  const ml = N <= 5000 || !quick ? runMl(poses, v0, active) : null;
  const rel = (c: number) => ((c - ourCost) / ourCost).toExponential(1);
  const sc = typeof scipy === 'string' ? null : scipy;
  const cells = [
    String(N), fitMs.toFixed(1), cpuBest.toFixed(1), median(lm).toFixed(1), String(rep.iterations.length - 1), rep.statistics.fit.after.rms.toFixed(4),
    sc ? (sc.seconds * 1000).toFixed(1) : String(scipy), sc ? (sc.cpu_seconds * 1000).toFixed(1) : '-',
    sc ? `${((sc.seconds * 1000) / fitMs).toFixed(1)}×` : '-', sc ? `${((sc.cpu_seconds * 1000) / cpuBest).toFixed(1)}×` : '-', sc ? rel(sc.cost) : '-',
    ml ? ml.ms.toFixed(0) : 'skipped', ml ? String(ml.iterations) : '-', ml ? rel(ml.cost) : '-',
  ];
  console.log(cells.map((c, i) => pad(c, i === 0 ? 6 : 10)).join(' '));
}
console.log('wall / cpu ratio: SciPy time ÷ Offsetry fit time. Δcost: (reference cost − Offsetry cost) / Offsetry cost at the end of each solver (½ Σ r²).');
console.log('fit cpu: process CPU time of the fastest run; on a shared machine the wall-clock median also contains time spent waiting for a core.');
console.log('targets: 60 poses < 5 ms, 5 000 < 80 ms, 20 000 < 350 ms, linear growth, ≥ 2× faster than SciPy at every size');
