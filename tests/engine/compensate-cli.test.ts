/**
 * `offsetry compensate` as a user runs it: node bin/offsetry.mjs in a child process, real files in a
 * temporary folder. Checks the written program (read back with csv-parse), the refusals (file, line,
 * field; nothing written) and the usage errors.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFile } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { parse } from 'csv-parse/sync';
import { parseGeometry } from '../../src/lib/engine/geometry';
import { forwardFrames } from '../../src/lib/engine/kinematics';
import { anglesFromRotation } from '../../src/lib/engine/rotations';
import { ROOT } from './make-test-data';

const PROJECT = resolve(__dirname, '..', '..');
const BIN = join(PROJECT, 'bin', 'offsetry.mjs');
const NOMINAL = join(ROOT, 'orrin-r6-620-nominal.json');
// The invented "true" unit stands in for a calibrated geometry (it has a base in the tracker frame).
const CALIBRATED = join(ROOT, 'orrin-r6-620-true.json');

function offsetry(args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  return new Promise((done) => {
    execFile(process.execPath, [BIN, ...args], { cwd: PROJECT, timeout: 60_000 }, (err, stdout, stderr) => {
      done({ code: err ? (typeof err.code === 'number' ? err.code : -1) : 0, stdout, stderr });
    });
  });
}

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'offsetry-compensate-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const cal = parseGeometry(readFileSync(CALIBRATED, 'utf8'), 'cal');
function tool(q: number[]) {
  const f = forwardFrames({ ...cal, base: undefined }, q).at(-1)!;
  return { x: f[3], y: f[7], z: f[11], ...anglesFromRotation([f[0], f[1], f[2], f[4], f[5], f[6], f[8], f[9], f[10]]) };
}

describe('offsetry compensate', () => {
  it('writes the compensated program: one row per target, calibrated joints and the nominal target at them', async () => {
    const qs = [[10, -30, 40, 20, 50, 30], [12, -28, 42, 22, 48, 32], [14, -26, 44, 24, 46, 34]];
    const lines = ['target,x,y,z,rx,ry,rz,q1,q2,q3,q4,q5,q6', ...qs.map((q, k) => {
      const t = tool(q);
      return [`=P${k + 1}`, t.x, t.y, t.z, t.rx, t.ry, t.rz, ...q.map((v) => v + 1)].join(',');
    })];
    writeFileSync(join(dir, 'prog.csv'), lines.join('\n') + '\n');
    const r = await offsetry(['compensate', '--model', CALIBRATED, '--nominal', NOMINAL, '--targets', join(dir, 'prog.csv'), '--out', join(dir, 'out.csv')]);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/3 cartesian targets \(base frame\) compensated for .*: 3 reached/);
    expect(r.stdout).toMatch(/reduced speed/);
    const rows = parse(readFileSync(join(dir, 'out.csv'), 'utf8'), { columns: true }) as Record<string, string>[];
    expect(rows).toHaveLength(3);
    expect(rows[0].target).toBe("'=P1");
    rows.forEach((row, k) => {
      expect(row.status).toBe('reached');
      // The calibrated arm reaches the target at q (the program was made from the calibrated arm at qs).
      qs[k].forEach((v, i) => expect(Number(row[`q${i + 1}`])).toBeCloseTo(v, 6));
      // The compensated target differs from the original by the calibration's correction (mm level).
      const t = tool(qs[k]);
      const d = Math.hypot(Number(row.x) - t.x, Number(row.y) - t.y, Number(row.z) - t.z);
      expect(d).toBeGreaterThan(0.1);
      expect(d).toBeLessThan(20);
    });
  });

  it('accepts --frame measurement and --tool', async () => {
    writeFileSync(join(dir, 'joints.csv'), 'target,q1,q2,q3,q4,q5,q6\nA,10,-30,40,20,50,30\n');
    const r = await offsetry(['compensate', '--model', CALIBRATED, '--nominal', NOMINAL, '--targets', join(dir, 'joints.csv'), '--out', join(dir, 'joints-out.csv'), '--frame', 'measurement', '--tool', '0,0,150,0,0,0']);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/1 joint targets \(measurement frame\)/);
  });

  it('refuses a bad program with file, line and field, and writes nothing', async () => {
    writeFileSync(join(dir, 'bad.csv'), 'target,x,y,z\nA,1,2,3\nB,1,two,3\n');
    const out = join(dir, 'never.csv');
    const r = await offsetry(['compensate', '--model', CALIBRATED, '--nominal', NOMINAL, '--targets', join(dir, 'bad.csv'), '--out', out]);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/bad\.csv, line 3, field y: "two" is not a number/);
    expect(existsSync(out)).toBe(false);
    expect(readdirSync(dir).filter((f) => f.endsWith('.tmp'))).toEqual([]);
  });

  it('refuses a geometry pair of different arms, and bad usage', async () => {
    writeFileSync(join(dir, 'j.csv'), 'target,q1,q2,q3,q4\nA,1,2,-3,4\n');
    const s4 = join(ROOT, 'orrin-s4-410-nominal.json');
    const r = await offsetry(['compensate', '--model', CALIBRATED, '--nominal', s4, '--targets', join(dir, 'joints.csv'), '--out', join(dir, 'o.csv')]);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/the calibrated geometry has 6 joints, the nominal 4/);
    // A program for another arm: its header names the columns this arm needs.
    const p = await offsetry(['compensate', '--model', CALIBRATED, '--nominal', NOMINAL, '--targets', join(dir, 'j.csv'), '--out', join(dir, 'o.csv')]);
    expect(p.stderr).toMatch(/j\.csv, line 1, field q5: joint values need all 6 columns/);
    const u = await offsetry(['compensate', '--model', CALIBRATED, '--nominal', NOMINAL, '--targets', join(dir, 'j.csv'), '--out', join(dir, 'o.csv'), '--tool', '1,2']);
    expect(u.code).toBe(2);
    expect(u.stderr).toMatch(/--tool.*expected x,y,z or x,y,z,rx,ry,rz/);
    const f = await offsetry(['compensate', '--model', CALIBRATED, '--nominal', NOMINAL, '--targets', join(dir, 'j.csv'), '--out', join(dir, 'o.csv'), '--frame', 'world']);
    expect(f.code).toBe(2);
    const h = await offsetry(['--help']);
    expect(h.stdout).toContain('offsetry compensate --model CALIBRATED.json --nominal NOMINAL.json --targets TARGETS.csv --out OUT.csv');
  });
});
