/**
 * Inverse-kinematics benchmark: compensation of a 10 000-target program for an invented six-axis arm
 * (targets/second, in-process), beside SciPy's least_squares solving the same inverse problem per target
 * (tests/engine/reference/inverse_kinematics.py: method 'trf' with the joint limits as bounds, SciPy's
 * finite-difference Jacobian). SciPy is timed on the first 500 targets and its rate extrapolated.
 * Run: npx tsx scripts/bench-ik.ts [--quick]
 */
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { cpuUsage } from 'node:process';
import { compensateProgram } from '../src/lib/engine/compensate';
import { IkSolver } from '../src/lib/engine/ik';
import { anglesFromRotation } from '../src/lib/engine/rotations';
import { compileArm } from '../src/lib/engine/kinematics';
import type { ParsedProgram } from '../src/lib/engine/program-csv';
import type { ArmGeometry } from '../src/lib/engine/types';
import { normalVariate, seededRandom } from '../src/lib/engine/random';
import { sixAxisDh } from '../tests/support/arms';

const quick = process.argv.includes('--quick');
const COUNT = 10_000;
const SCIPY_COUNT = quick ? 100 : 500;

// Invented six-axis arm (the engine benchmark's BA-6), not any product's parameters.
// The engine tests' invented six-axis DH arm (tests/support/arms.ts), under the benchmark's name.
const nominal: ArmGeometry = { ...sixAxisDh(), name: 'Bench arm BA-6' };
const r = seededRandom(3);
const s = () => 2 * r() - 1;
const calibrated: ArmGeometry = {
  ...nominal,
  joints: nominal.joints.map((j) => ({ ...j, a: j.a + 0.8 * s(), alpha: j.alpha + 0.08 * s(), d: j.d + 0.8 * s(), theta: j.theta + 0.08 * s(), ...(j.beta !== undefined ? { beta: 0.05 * s() } : {}) })),
};

// A continuous path (as programs are): joints sweep smoothly; the targets are the calibrated arm's poses.
const solver = new IkSolver(calibrated);
const path: number[][] = [];
for (let k = 0; k < COUNT; k++) {
  const t = k / COUNT;
  path.push([60 * Math.sin(2 * Math.PI * t), -40 + 25 * Math.sin(6 * Math.PI * t), 30 + 30 * Math.cos(4 * Math.PI * t), 40 * Math.sin(10 * Math.PI * t), 45 + 20 * Math.cos(8 * Math.PI * t), 90 * Math.sin(3 * Math.PI * t)]);
}
const targets = path.map((q, k) => {
  const p = solver.pose(q);
  return { name: `T${k + 1}`, line: k + 2, pose: { x: p.position[0], y: p.position[1], z: p.position[2], ...anglesFromRotation(p.rotation) }, R: p.rotation, q };
});
const program: ParsedProgram = { kind: 'cartesian', orientation: true, hints: false, targets: targets.map(({ R: _R, q: _q, ...t }) => ({ ...t, q: undefined })) };
// Start the path from a hint (the rest is seeded by the previous solution).
program.targets[0].q = path[0].map((v) => v + 2);

const runs: { ms: number; cpu: number }[] = [];
let last: ReturnType<typeof compensateProgram> | undefined;
for (let k = 0; k < (quick ? 2 : 4); k++) {
  const c0 = cpuUsage(), t0 = performance.now();
  last = compensateProgram(calibrated, nominal, program);
  const ms = performance.now() - t0, c = cpuUsage(c0);
  if (k > 0) runs.push({ ms, cpu: (c.user + c.system) / 1000 });
}
runs.sort((a, b) => a.ms - b.ms);
const med = runs[Math.floor(runs.length / 2)];
const counts = last!.counts;

// SciPy on the first SCIPY_COUNT targets, each from the previous target's joints (as the engine is seeded).
const model = compileArm(calibrated);
const script = fileURLToPath(new URL('../tests/engine/reference/inverse_kinematics.py', import.meta.url));
const rad = (v: number) => (v * Math.PI) / 180;
const input = {
  convention: calibrated.convention, prismatic: Array.from(model.prismatic), v: Array.from(model.nominal), scale: solver.options.lengthScale,
  lower: calibrated.joints.map((j) => rad(j.min!)), upper: calibrated.joints.map((j) => rad(j.max!)),
  targets: targets.slice(0, SCIPY_COUNT).map((t, k) => ({ position: t.pose ? [t.pose.x, t.pose.y, t.pose.z] : [], rotation: Array.from(t.R), seed: (k === 0 ? path[0].map((v) => v + 2) : path[k - 1]).map(rad) })),
};
const py = spawnSync(process.env.PYTHON ?? 'python3', [script], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 1 << 26 });
let scipyRate: number | undefined;
if (py.status === 0) scipyRate = SCIPY_COUNT / (JSON.parse(py.stdout) as { seconds: number }).seconds;

console.log(`Compensation of a ${COUNT}-target Cartesian program (full pose, continuous path, six-axis DH arm), in-process:`);
console.log(`  Offsetry IK     ${med.ms.toFixed(0)} ms wall (median of ${runs.length}), ${med.cpu.toFixed(0)} ms CPU → ${Math.round(COUNT / (med.ms / 1000)).toLocaleString('en')} targets/s   target: ${COUNT} targets < 1 s`);
console.log(`                  statuses: ${Object.entries(counts).map(([k, v]) => `${v} ${k}`).join(', ')}`);
console.log(scipyRate !== undefined
  ? `  SciPy least_squares (trf, per target, ${SCIPY_COUNT} targets timed) → ${Math.round(scipyRate).toLocaleString('en')} targets/s; ${COUNT} targets ≈ ${(COUNT / scipyRate).toFixed(1)} s (${((COUNT / scipyRate) / (med.ms / 1000)).toFixed(0)}× slower)`
  : `  SciPy: not available (${py.stderr.trim().split('\n').at(-1)})`);

// ---- Gain on simulated arms: nominal program error on the "true" arm vs compensated, held-out targets ----
// Each invented "true" arm: the nominal plus errors (0.8 mm, 0.08°), measured at 240 random poses with 0.02 mm
// noise per coordinate, fitted with 25 % held out. Then 300 new targets (not in the session), full pose, in the
// tracker frame, with joint hints a few degrees off: compensated = solved on the calibrated arm; uncompensated =
// solved on the nominal model placed exactly at the true base. Error = |true arm's tool point − target|.
const { fitSession } = await import('../src/lib/engine/fit');
const gauss = normalVariate;
function trueArm(g: ArmGeometry, seed: number): ArmGeometry {
  const q = seededRandom(seed), u = () => 2 * q() - 1;
  return {
    ...g,
    joints: g.joints.map((j) => ({ ...j, a: j.a + 0.8 * u(), alpha: j.alpha + 0.08 * u(), d: j.d + 0.8 * u(), theta: j.theta + 0.08 * u(), ...(j.beta !== undefined ? { beta: j.beta + 0.05 * u() } : {}) })),
    base: { x: 2500 + 5 * u(), y: -800 + 5 * u(), z: -300 + 5 * u(), rx: 0.4 * u(), ry: 0.3 * u(), rz: 35 + 2 * u() },
    tool: { ...g.tool!, x: g.tool!.x + 0.5 * u(), y: g.tool!.y + 0.5 * u(), z: g.tool!.z + 0.5 * u() },
  };
}
const inRange = (g: ArmGeometry, q: () => number, margin: number) => g.joints.map((j) => { const lo = j.min ?? -180, hi = j.max ?? 180, m = margin * (hi - lo); return lo + m + (hi - lo - 2 * m) * q(); });
const rms = (v: number[]) => Math.sqrt(v.reduce((a, x) => a + x * x, 0) / v.length);
console.log('\nGain on simulated arms (300 held-out full-pose targets each, tracker frame):');
console.log('  arm                      fit hold-out RMS   nominal program RMS / max   compensated RMS / max');
for (const [label, g0, seed] of [['BA-6 (DH)', nominal, 51], ['BA-6 (DH)', nominal, 52], ['BA-6 (DH)', nominal, 53]] as const) {
  const truth = trueArm(g0, seed);
  const tr = new IkSolver(truth);
  const q = seededRandom(seed + 1000);
  const poses = Array.from({ length: 240 }, (_, k) => {
    const qq = inRange(truth, q, 0);
    const p = tr.pose(qq).position;
    return { label: `P${k + 1}`, line: k + 2, q: qq, x: p[0] + 0.02 * gauss(q), y: p[1] + 0.02 * gauss(q), z: p[2] + 0.02 * gauss(q) };
  });
  const report = fitSession(g0, poses, { holdout: 0.25 });
  const held = Array.from({ length: 300 }, (_, k) => {
    const qq = inRange(truth, q, 0.15);
    const p = tr.pose(qq);
    return { name: `H${k + 1}`, line: k + 2, pose: { x: p.position[0], y: p.position[1], z: p.position[2], ...anglesFromRotation(p.rotation) }, q: qq.map((v) => v + 4 * (q() - 0.5)), R: p.rotation };
  });
  const comp = compensateProgram(report.calibrated, g0, { kind: 'cartesian', orientation: true, hints: true, targets: held.map(({ R: _R, ...t }) => t) }, { frame: 'measurement' });
  const placed = new IkSolver({ ...g0, base: truth.base });
  const eC: number[] = [], eN: number[] = [];
  comp.targets.forEach((c, k) => {
    if (c.status === 'unreachable' || c.status === 'outside-limits') return;
    const t = held[k].pose;
    const a = tr.pose(c.q).position;
    eC.push(Math.hypot(a[0] - t.x, a[1] - t.y, a[2] - t.z));
    const nq = placed.solve({ position: [t.x, t.y, t.z], rotation: held[k].R }, { q: c.q }).q;
    const b = tr.pose(nq).position;
    eN.push(Math.hypot(b[0] - t.x, b[1] - t.y, b[2] - t.z));
  });
  const f = (v: number) => v.toFixed(3).padStart(6);
  console.log(`  ${`${label} seed ${seed}`.padEnd(24)} ${f(report.statistics.holdout!.after.rms)} mm          ${f(rms(eN))} / ${f(Math.max(...eN))} mm         ${f(rms(eC))} / ${f(Math.max(...eC))} mm   (${eC.length} targets)`);
}
