/**
 * Inverse kinematics and program compensation: inverse against forward kinematics on every geometry kind,
 * against SciPy least_squares solving the same inverse problem, every status from a constructed case,
 * and the gain of compensation on seeded simulated arms.
 */
import { describe, expect, it } from 'vitest';
import { spawnSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { parse } from 'csv-parse/sync';
import { IkSolver } from '../../src/lib/engine/ik';
import { anglesFromRotation, rotationFromAngles, rotationVector } from '../../src/lib/engine/rotations';
import { compensateProgram } from '../../src/lib/engine/compensate';
import { compensatedCsv, parseProgramCsv, programCsv, type ParsedProgram, type ProgramTarget } from '../../src/lib/engine/program-csv';
import { forwardFrames, compileArm } from '../../src/lib/engine/kinematics';
import { fitSession } from '../../src/lib/engine/fit';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { fourAxisParallel, perturbed, randomQ, rng, sixAxisDh, sixAxisMdh, synthSession } from './helpers';

// Tolerances of "reached" asked of the solver (the product's contract: 1e-6 mm and 1e-6°).
const MM = 1e-6;
const DEGREES = 1e-6;

/** Position and rotation of the tool frame by the engine's frame walk (forwardFrames), independent of IkSolver.pose. */
function toolPose(g: ArmGeometry, q: number[]): { p: number[]; R: number[] } {
  const f = forwardFrames(g, q).at(-1)!;
  return { p: [f[3], f[7], f[11]], R: [f[0], f[1], f[2], f[4], f[5], f[6], f[8], f[9], f[10]] };
}

/** Angle (deg) between two rotations from ‖A − B‖_F = 2√2·sin(θ/2) (well conditioned near 0, unlike acos of the trace). */
function angleBetween(A: ArrayLike<number>, B: ArrayLike<number>): number {
  let s = 0;
  for (let k = 0; k < 9; k++) s += (A[k] - B[k]) ** 2;
  return (2 * Math.asin(Math.min(1, Math.sqrt(s) / (2 * Math.SQRT2))) * 180) / Math.PI;
}

const withBeta: ArmGeometry = { ...perturbed(sixAxisDh(), 11), name: 'Pell R6-700 true, beta and base' };
const mdhTrue: ArmGeometry = { ...perturbed(sixAxisMdh(), 12), name: 'Pell R6-700m true' };
const prismatic: ArmGeometry = { ...perturbed(fourAxisParallel(), 13), name: 'Pell S4-600 true, prismatic' };

describe('rotation helpers', () => {
  it('round-trips Rz·Ry·Rx angles and finds the rotation vector up to π', () => {
    const a = anglesFromRotation(rotationFromAngles(12.5, -33.25, 170));
    expect(a.rx).toBeCloseTo(12.5, 12);
    expect(a.ry).toBeCloseTo(-33.25, 12);
    expect(a.rz).toBeCloseTo(170, 12);
    const w = new Float64Array(3);
    // 180° about (1,1,0)/√2 (common practice: R = 2uuᵀ − I for a half turn).
    const s = Math.SQRT1_2;
    rotationVector([2 * s * s - 1, 2 * s * s, 0, 2 * s * s, 2 * s * s - 1, 0, 0, 0, -1], w);
    expect(Math.hypot(w[0], w[1], w[2])).toBeCloseTo(Math.PI, 9);
    expect(Math.abs(w[0] - w[1])).toBeLessThan(1e-9);
  });
});

describe('inverse against forward kinematics', () => {
  for (const g of [sixAxisDh(), withBeta, mdhTrue, prismatic]) {
    it(`${g.name}: reached targets lie within 1e-6 mm and 1e-6° of the forward kinematics`, () => {
      const solver = new IkSolver(g);
      const r = rng(101);
      let reached = 0;
      for (let k = 0; k < 200; k++) {
        const q = randomQ(g, r);
        const t = toolPose(g, q);
        const seed = q.map((v, i) => v + (g.joints[i].type === 'prismatic' ? 20 : 8) * (r() - 0.5));
        const res = solver.solve({ position: t.p, rotation: t.R }, { q: seed });
        if (res.status === 'unreachable' || res.status === 'outside-limits') continue;
        reached++;
        const back = toolPose(g, res.q);
        expect(Math.hypot(back.p[0] - t.p[0], back.p[1] - t.p[1], back.p[2] - t.p[2])).toBeLessThan(MM);
        expect(angleBetween(back.R, t.R)).toBeLessThan(DEGREES);
        g.joints.forEach((j, i) => {
          if (j.min !== undefined) expect(res.q[i]).toBeGreaterThanOrEqual(j.min);
          if (j.max !== undefined) expect(res.q[i]).toBeLessThanOrEqual(j.max);
        });
      }
      expect(reached).toBeGreaterThanOrEqual(195);
    });
  }

  it('position-only targets: reached point within 1e-6 mm', () => {
    const g = withBeta;
    const solver = new IkSolver(g);
    const r = rng(7);
    for (let k = 0; k < 50; k++) {
      const q = randomQ(g, r);
      const t = toolPose(g, q);
      const res = solver.solve({ position: t.p }, { q: q.map((v) => v + 5 * (r() - 0.5)) });
      expect(['reached', 'singular']).toContain(res.status);
      const back = toolPose(g, res.q);
      expect(Math.hypot(back.p[0] - t.p[0], back.p[1] - t.p[1], back.p[2] - t.p[2])).toBeLessThan(MM);
    }
  });
});

describe('against SciPy least_squares on the same inverse problem', () => {
  it('finds the same joint values from the same seeds (full pose, limits as bounds)', () => {
    const g = withBeta;
    const solver = new IkSolver(g);
    const model = compileArm(g);
    const r = rng(202);
    const targets: { position: number[]; rotation: number[]; seed: number[]; seedRad: number[] }[] = [];
    for (let k = 0; k < 25; k++) {
      const q = randomQ(g, r);
      const t = toolPose(g, q);
      const seed = q.map((v) => v + 6 * (r() - 0.5));
      targets.push({ position: t.p, rotation: t.R, seed, seedRad: seed.map((v) => (v * Math.PI) / 180) });
    }
    const script = fileURLToPath(new URL('./reference/inverse_kinematics.py', import.meta.url));
    const input = {
      convention: g.convention, prismatic: Array.from(model.prismatic), v: Array.from(model.nominal), scale: solver.options.lengthScale,
      lower: g.joints.map((j) => (j.min ?? null) === null ? null : (j.min! * Math.PI) / 180),
      upper: g.joints.map((j) => (j.max ?? null) === null ? null : (j.max! * Math.PI) / 180),
      targets: targets.map((t) => ({ position: t.position, rotation: t.rotation, seed: t.seedRad })),
    };
    const run = spawnSync(process.env.PYTHON ?? 'python3', [script], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 1 << 26 });
    expect(run.status, run.stderr).toBe(0);
    const ref = JSON.parse(run.stdout) as { results: { q: number[]; cost: number }[] };
    let compared = 0;
    targets.forEach((t, k) => {
      const ours = solver.solve({ position: t.position, rotation: t.rotation }, { q: t.seed });
      // SciPy's trf from the same seed, finite-difference Jacobian (reference: scipy.optimize.least_squares,
      // method 'trf', SciPy 1.x documentation). Its cost floor is about 1e-20 (½|r|², mm²).
      if (ours.status === 'unreachable' || ref.results[k].cost > 1e-12) return;
      compared++;
      ref.results[k].q.forEach((v, i) => expect(Math.abs(ours.q[i] - (v * 180) / Math.PI)).toBeLessThan(1e-6));
    });
    expect(compared).toBeGreaterThanOrEqual(22);
  });
});

describe('every status from a constructed case', () => {
  const g = sixAxisDh();
  const solver = new IkSolver(g);
  const home = [10, -30, 40, 20, 50, 30];

  it('reached', () => {
    const t = toolPose(g, home);
    const res = solver.solve({ position: t.p, rotation: t.R }, { q: home.map((v) => v + 3) });
    expect(res.status).toBe('reached');
    expect(res.message).toBe('reached');
  });

  it('unreachable, with the remaining distance', () => {
    const t = toolPose(g, home);
    const far = t.p.map((v) => v * 4); // four times as far from the base as a reachable point
    const res = solver.solve({ position: far, rotation: t.R }, { q: home });
    expect(res.status).toBe('unreachable');
    expect(res.positionError).toBeGreaterThan(1000);
    expect(res.message).toMatch(/unreachable: the closest configuration found stays \d+\.\d{3} mm/);
  });

  it('outside joint limits, naming the joint and the value it would need', () => {
    // J1 limited to ±30°, target made with J1 = 60°.
    const narrow: ArmGeometry = { ...g, joints: g.joints.map((j, i) => (i === 0 ? { ...j, min: -30, max: 30 } : j)) };
    const s = new IkSolver(narrow);
    const q = [60, -30, 40, 20, 50, 30];
    const t = toolPose(narrow, q);
    const res = s.solve({ position: t.p, rotation: t.R }, { q: [25, -30, 40, 20, 50, 30] });
    expect(res.status).toBe('outside-limits');
    expect(res.limit?.joint).toBe('J1');
    expect(res.limit?.needed).toBeCloseTo(60, 6);
    expect(res.q[0]).toBeLessThanOrEqual(30);
    expect(res.message).toMatch(/needs J1 at 60\.0000°/);
  });

  it('near a singularity (wrist: J5 = 0 aligns J4 and J6), with the smallest singular value', () => {
    const q = [10, -30, 40, 20, 0, 30];
    const t = toolPose(g, q);
    const res = solver.solve({ position: t.p, rotation: t.R }, { q: [12, -28, 42, 25, 3, 25] });
    expect(res.status).toBe('singular');
    expect(res.smallestSingularValue).toBeLessThan(1e-6);
    expect(res.message).toMatch(/near a singularity: smallest singular value/);
    // The same arm away from the wrist singularity is not flagged.
    expect(solver.solve({ position: toolPose(g, home).p, rotation: toolPose(g, home).R }, { q: home }).smallestSingularValue).toBeGreaterThan(0.002);
  });

  it('configuration jump from the previous target (wrist flip)', () => {
    // The same tool pose in the flipped wrist: J4 + 180°, J5 → −J5, J6 + 180° (common practice for a spherical wrist).
    const t = toolPose(g, home);
    const flipped = [home[0], home[1], home[2], home[3] - 180, -home[4], home[5] - 180];
    expect(toolPose(g, flipped).p[0]).toBeCloseTo(t.p[0], 6);
    const res = solver.solve({ position: t.p, rotation: t.R }, { q: flipped, previous: home });
    expect(res.status).toBe('jump');
    expect(res.jump?.joint).toBe('J4');
    expect(Math.abs(res.jump!.change)).toBeCloseTo(180, 4);
    expect(res.message).toMatch(/configuration jump: J4 changes by -180\.0000° from the previous target \(threshold 90°\)/);
    // Not flagged when the program itself moves that way (hints that change by the same amount).
    const asPlanned = solver.solve({ position: t.p, rotation: t.R }, { q: flipped, previous: home, intendedChange: flipped.map((v, i) => v - home[i]) });
    expect(asPlanned.status).toBe('reached');
  });
});

/** Random full-pose targets of `truth` in the tracker frame, away from its limits. */
function heldOutTargets(truth: ArmGeometry, count: number, seed: number): { name: string; q: number[]; p: number[]; R: number[] }[] {
  const r = rng(seed);
  return Array.from({ length: count }, (_, k) => {
    const q = truth.joints.map((j) => {
      const lo = j.min ?? -180, hi = j.max ?? 180, m = 0.15 * (hi - lo);
      return lo + m + (hi - lo - 2 * m) * r();
    });
    const t = toolPose(truth, q);
    return { name: `H${k + 1}`, q, ...t, p: t.p, R: t.R };
  });
}

describe('compensation on seeded simulated arms', () => {
  for (const [label, nominal, seed] of [['DH six-axis', sixAxisDh(), 31], ['MDH six-axis', sixAxisMdh(), 32]] as const) {
    it(`${label}: compensated error on the true arm within 3× the fit's held-out RMS; the nominal program shows the full error`, () => {
      const truth = perturbed(nominal, seed);
      const report = fitSession(nominal, synthSession(truth, 240, 0.02, seed + 100), { holdout: 0.25 });
      const holdoutRms = report.statistics.holdout!.after.rms;
      const targets = heldOutTargets(truth, 150, seed + 200);
      const hr = rng(seed + 300);
      const program: ParsedProgram = {
        kind: 'cartesian', orientation: true, hints: true,
        targets: targets.map((t, k) => {
          const a = anglesFromRotation(t.R);
          // Configuration hints as an offline program carries them: the taught joints, a few degrees off.
          return { name: t.name, line: k + 2, pose: { x: t.p[0], y: t.p[1], z: t.p[2], ...a }, q: t.q.map((v) => v + 4 * (hr() - 0.5)) };
        }),
      };
      // Compensated: targets in the tracker frame, solved on the calibrated arm, run on the true arm.
      const comp = compensateProgram(report.calibrated, nominal, program, { frame: 'measurement' });
      // Uncompensated: the nominal model placed exactly where the true arm stands (best case for it).
      const nominalPlaced = new IkSolver({ ...nominal, base: truth.base });
      const errC: number[] = [], errN: number[] = [];
      comp.targets.forEach((c, k) => {
        const t = targets[k];
        if (c.status === 'unreachable' || c.status === 'outside-limits') return;
        const at = toolPose(truth, c.q).p;
        errC.push(Math.hypot(at[0] - t.p[0], at[1] - t.p[1], at[2] - t.p[2]));
        const n = nominalPlaced.solve({ position: t.p, rotation: t.R }, { q: c.q });
        const atN = toolPose(truth, n.q).p;
        errN.push(Math.hypot(atN[0] - t.p[0], atN[1] - t.p[1], atN[2] - t.p[2]));
      });
      const rms = (v: number[]) => Math.sqrt(v.reduce((s, x) => s + x * x, 0) / v.length);
      expect(errC.length).toBeGreaterThanOrEqual(140);
      expect(rms(errC)).toBeLessThan(3 * holdoutRms);
      // The nominal error is the fit's "before" level: millimetres, far above the tracker noise.
      expect(rms(errN)).toBeGreaterThan(0.5);
      expect(rms(errN)).toBeGreaterThan(20 * rms(errC));
    });
  }

  it('base-frame output drives the nominal controller to the calibrated joint values (round trip)', () => {
    const nominal = sixAxisDh();
    const cal = { ...perturbed(nominal, 5), base: undefined };
    const calBase = new IkSolver(cal);
    const r = rng(9);
    const targets: ProgramTarget[] = Array.from({ length: 40 }, (_, k) => {
      const t = toolPose(cal, heldOutTargets(cal, 1, 300 + k)[0].q);
      return { name: `T${k}`, line: k + 2, pose: { x: t.p[0], y: t.p[1], z: t.p[2], ...anglesFromRotation(t.R) } };
    });
    const res = compensateProgram(cal, nominal, { kind: 'cartesian', orientation: true, hints: false, targets });
    const nominalIk = new IkSolver(nominal);
    res.targets.forEach((c, k) => {
      if (c.status === 'unreachable' || c.status === 'outside-limits') return;
      // The nominal controller's IK of the compensated target returns the calibrated joint values,
      // and the calibrated arm there is on the original target.
      const back = nominalIk.solve({ position: [c.x, c.y, c.z], rotation: rotationFromAngles(c.rx, c.ry, c.rz) }, { q: c.q.map((v) => v + r() - 0.5) });
      back.q.forEach((v, i) => expect(Math.abs(v - c.q[i])).toBeLessThan(1e-6));
      const p = calBase.pose(c.q).position;
      expect(Math.hypot(p[0] - targets[k].pose!.x, p[1] - targets[k].pose!.y, p[2] - targets[k].pose!.z)).toBeLessThan(MM);
      expect(c.correction).toBeGreaterThan(0.05);
    });
  });

  it('joint programs: the intended pose is the nominal pose at the given joints; output joints reach it on the calibrated arm', () => {
    const nominal = sixAxisMdh();
    const cal = { ...perturbed(nominal, 6), base: undefined };
    const targets: ProgramTarget[] = heldOutTargets(nominal, 30, 77).map((t, k) => ({ name: t.name, line: k + 2, q: t.q }));
    const res = compensateProgram(cal, nominal, { kind: 'joint', orientation: false, hints: false, targets });
    let checked = 0;
    res.targets.forEach((c, k) => {
      const want = toolPose(nominal, targets[k].q!);
      const got = toolPose(cal, c.q);
      expect(Math.hypot(got.p[0] - want.p[0], got.p[1] - want.p[1], got.p[2] - want.p[2])).toBeLessThan(MM);
      expect(angleBetween(got.R, want.R)).toBeLessThan(DEGREES);
      // Closest to the given joints: a fraction of a degree away, not another configuration.
      // Near a singularity the joint values are ill-determined (a 1 mm correction over σ = 0.005 moves
      // joints by ~5°), so the check applies to well-conditioned targets.
      if (c.smallestSingularValue > 0.01) checked++;
      if (c.smallestSingularValue > 0.01) c.q.forEach((v, i) => expect(Math.abs(v - targets[k].q![i]), `${c.target} joint ${i + 1}: ${targets[k].q!.map((x) => x.toFixed(2))} → ${c.q.map((x) => x.toFixed(2))}, σ ${c.smallestSingularValue}`).toBeLessThan(2));
    });
    expect(checked).toBeGreaterThanOrEqual(20);
  });

  it('a tool override replaces both tools', () => {
    const nominal = sixAxisDh();
    const cal = { ...perturbed(nominal, 8), base: undefined };
    const tool = { x: 0, y: 50, z: 200, rx: 0, ry: 30, rz: 0 };
    const t = toolPose({ ...cal, tool }, [5, -20, 30, 10, 40, 20]);
    const res = compensateProgram(cal, nominal, { kind: 'cartesian', orientation: true, hints: false, targets: [{ name: 'A', line: 2, pose: { x: t.p[0], y: t.p[1], z: t.p[2], ...anglesFromRotation(t.R) }, q: [5, -20, 30, 10, 40, 20] }] }, { tool });
    expect(res.targets[0].status).toBe('reached');
    res.targets[0].q.forEach((v, i) => expect(v).toBeCloseTo([5, -20, 30, 10, 40, 20][i], 6));
    const nomAt = toolPose({ ...nominal, tool }, res.targets[0].q).p;
    expect(res.targets[0].x).toBeCloseTo(nomAt[0], 9);
  });
});

describe('program files', () => {
  const g = sixAxisDh();
  it('refuses bad input with line and field', () => {
    const bad = parseProgramCsv('target,x,y,z,rx,ry\nA,1,2,3,4,5\n', 'p.csv', 6);
    expect(bad.ok).toBe(false);
    if (!bad.ok) expect(bad.problems[0]).toMatchObject({ file: 'p.csv', line: 1, column: 'rz' });
    const cell = parseProgramCsv('target,x,y,z\nA,1,2,3\n\nB,1,2,3,5\nC,1,"2,5",3\nD,1,,3\n', 'p.csv', 6);
    expect(cell.ok).toBe(false);
    if (!cell.ok) {
      expect(cell.problems.map((p) => [p.line, p.column])).toEqual([[4, undefined], [5, 'y'], [6, 'y']]);
      expect(cell.problems[1].message).toMatch(/decimal comma/);
    }
    const unknown = parseProgramCsv('target,x,y,z,speed\nA,1,2,3,4\n', 'p.csv', 6);
    expect(unknown.ok || unknown.problems[0].column).toBe('speed');
    const q7 = parseProgramCsv('target,q1,q2,q3,q4,q5,q6,q7\nA,1,2,3,4,5,6,7\n', 'p.csv', 6);
    expect(q7.ok || q7.problems[0].message).toMatch(/the arm has 6 joints/);
    expect(parseProgramCsv('target,x,y,z\n', 'p.csv', 6).ok).toBe(false);
  });

  it('writes full precision and neutralises formula names; read back by csv-parse', () => {
    const targets: ProgramTarget[] = [
      { name: '=HYPERLINK("x")', line: 2, q: [1, 2, 3, 4, 5, 6] },
      { name: '-P2', line: 3, q: [1.5, -2, 3, 4, 5, 6] },
      { name: '@P3', line: 4, q: [1, 2, 3, 4, 5, 6.25] },
    ];
    const res = compensateProgram({ ...perturbed(g, 2), base: undefined }, g, { kind: 'joint', orientation: false, hints: false, targets });
    const text = compensatedCsv(res.targets, 6);
    // csv-parse is the csv project's reader, outside this module.
    const rows = parse(text, { columns: true }) as Record<string, string>[];
    expect(Object.keys(rows[0])).toEqual(['target', 'q1', 'q2', 'q3', 'q4', 'q5', 'q6', 'x', 'y', 'z', 'rx', 'ry', 'rz', 'status', 'message']);
    expect(rows.map((r) => r.target)).toEqual(["'=HYPERLINK(\"x\")", "'-P2", "'@P3"]);
    rows.forEach((r, k) => {
      expect(Number(r.q1)).toBe(res.targets[k].q[0]); // full double precision
      expect(Number(r.x)).toBe(res.targets[k].x);
      expect(r.status).toBe(res.targets[k].status);
    });
    // A program written by programCsv reads back as the same program.
    const back = parseProgramCsv(programCsv([{ name: 'A', line: 2, pose: { x: 1.25, y: -2, z: 3e-7, rx: 1, ry: 2, rz: 3 }, q: [1, 2, 3, 4, 5, 6] }], 6), 'x.csv', 6);
    expect(back.ok && back.kind === 'cartesian' && back.orientation && back.hints && back.targets[0].pose!.z).toBe(3e-7);
  });
});
