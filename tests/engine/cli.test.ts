/**
 * The command line as a user runs it: `node bin/offsetry.mjs …` in a child process, real files in a
 * temporary folder. Checks exit codes, messages (file, line, field) and that nothing is written on failure.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFile } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { parseGeometry } from '../../src/lib/engine/geometry';
import { parseSessionCsv } from '../../src/lib/engine/session-csv';
import { normalVariate, seededRandom } from '../../src/lib/engine/random';
import { BAD_FILES, ROOT } from './make-test-data';

const PROJECT = resolve(__dirname, '..', '..');
const BIN = join(PROJECT, 'bin', 'offsetry.mjs');
const R6 = join(ROOT, 'orrin-r6-620-nominal.json');
const R6_SESSION = join(ROOT, 'orrin-r6-620-session.csv');
const S4 = join(ROOT, 'orrin-s4-410-nominal.json');
const S4_SESSION = join(ROOT, 'orrin-s4-410-session.csv');

interface Run { code: number; stdout: string; stderr: string }

function offsetry(args: string[], cwd = PROJECT): Promise<Run> {
  return new Promise((done) => {
    execFile(process.execPath, [BIN, ...args], { cwd, timeout: 60_000 }, (err, stdout, stderr) => {
      const code = err ? (typeof err.code === 'number' ? err.code : -1) : 0;
      done({ code, stdout, stderr });
    });
  });
}

/** Runs jobs a few at a time (2-core machine). */
async function pool<T, R>(items: T[], width: number, job: (t: T) => Promise<R>): Promise<R[]> {
  const out: R[] = new Array(items.length);
  let next = 0;
  await Promise.all(Array.from({ length: width }, async () => {
    while (next < items.length) {
      const k = next++;
      out[k] = await job(items[k]);
    }
  }));
  return out;
}

let dir: string;
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'offsetry-cli-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const noTempFiles = () => expect(readdirSync(dir).filter((f) => f.endsWith('.tmp'))).toEqual([]);

describe('offsetry --help and usage errors', () => {
  it('--help lists the three commands and exits 0', async () => {
    const r = await offsetry(['--help']);
    expect(r.code).toBe(0);
    for (const c of ['offsetry fit --model NOMINAL.json --data SESSION.csv --out CALIBRATED.json', 'offsetry check --model', 'offsetry plan --model GEOMETRY.json --count 60 --out POSES.csv']) {
      expect(r.stdout).toContain(c);
    }
  });

  it('no command, an unknown command, an unknown flag or a missing flag exit 2', async () => {
    const [none, unknown, flag, missing, holdout] = await Promise.all([
      offsetry([]),
      offsetry(['calibrate']),
      offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', join(dir, 'x.json'), '--fast']),
      offsetry(['fit', '--model', R6, '--data', R6_SESSION]),
      offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', join(dir, 'x.json'), '--holdout', '1.5']),
    ]);
    expect(none.code).toBe(2);
    expect(unknown).toMatchObject({ code: 2, stderr: expect.stringMatching(/unknown command "calibrate"/) });
    expect(flag).toMatchObject({ code: 2, stderr: expect.stringMatching(/--fast/) });
    expect(missing).toMatchObject({ code: 2, stderr: expect.stringMatching(/missing --out/) });
    expect(holdout).toMatchObject({ code: 2, stderr: expect.stringMatching(/--holdout: "1.5" is not valid/) });
    expect(existsSync(join(dir, 'x.json'))).toBe(false);
  });
});

describe('offsetry fit', () => {
  it('prints the plausibility verdicts and exits 7 for a session of a different arm model', async () => {
    const r6 = JSON.parse(readFileSync(R6, 'utf8'));
    // Another six-axis model: the Orrin R6-620 session does not belong to it (J3.a 560 mm instead of 470 mm …).
    const other = { ...r6, name: 'other', joints: r6.joints.map((j: Record<string, number>, k: number) => ({ ...j, a: [0, 75, 560, 35, 0, 0][k], d: [420, 0, 0, 515, 0, 90][k], min: j.min! - 10, max: j.max! + 10 })) };
    const model = join(dir, 'other-model.json');
    writeFileSync(model, JSON.stringify(other));
    const r = await offsetry(['fit', '--model', model, '--data', R6_SESSION, '--out', join(dir, 'other-cal.json')]);
    expect(r.code).toBe(7);
    expect(r.stdout).toMatch(/Plausibility: IMPLAUSIBLE/);
    expect(r.stdout).toMatch(/✕ These measurements do not look like this arm model: The nominal model is \d+\.\d{3} mm RMS off/);
    expect(r.stdout).toMatch(/✕ \d parameter changes beyond the plausible bounds: .*J3\.a -9\d\.\d{3} mm/);
    const good = await offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', join(dir, 'r6-cal-2.json')]);
    expect(good.code).toBe(0);
    expect(good.stdout).toMatch(/Plausibility: PASS/);
  });

  it('fits the Orrin R6-620 sample: writes a full-precision geometry and the report, prints a summary', async () => {
    const out = join(dir, 'r6-cal.json');
    const rep = join(dir, 'r6-report.json');
    const r = await offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', out, '--report', rep]);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/fit RMS\s+\d+\.\d{3} mm\s+\d+\.\d{3} mm/);
    expect(r.stdout).toMatch(/hold-out RMS \(17\)/);
    expect(r.stdout).toMatch(/\d+ identified, \d+ fixed at nominal:\n  \S+: \S/);
    expect(r.stdout).toMatch(/\n  J1\.d: redundant/); // J1.d and the base z cannot be told apart
    expect(r.stdout).toMatch(/ISO 9283, 5 repeated poses/);
    const calibrated = parseGeometry(readFileSync(out, 'utf8'), out);
    expect(calibrated.base).toBeDefined();
    expect(calibrated.tool).toBeDefined();
    const report = JSON.parse(readFileSync(rep, 'utf8'));
    expect(report.calibrated).toEqual(calibrated);
    expect(report.timing.totalMs).toBeGreaterThan(0);
    expect(typeof report.engineVersion).toBe('string');
    // The session was made with 0.02 mm noise per coordinate (3-D RMS ≈ 0.035 mm) on a geometry about
    // 1 mm off the nominal: the held-out error must drop by more than an order of magnitude.
    expect(report.statistics.holdout.before.rms).toBeGreaterThan(0.5);
    expect(report.statistics.holdout.after.rms).toBeLessThan(0.06);
    expect(report.iso9283.poses).toHaveLength(5);
    noTempFiles();
  });

  it('fits the Orrin S4-410 sample with a random hold-out and reports the rank-deficient parameters', async () => {
    const out = join(dir, 's4-cal.json');
    const r = await offsetry(['fit', '--model', S4, '--data', S4_SESSION, '--out', out, '--holdout', '0.25', '--seed', '7']);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/held out at random \(0\.25\)/);
    expect(r.stdout).toMatch(/fixed at nominal:/);
    expect(parseGeometry(readFileSync(out, 'utf8'), out).name).toBe('Orrin S4-410');
  });

  it('every bad session file exits 1 naming the file and line, and writes nothing', async () => {
    const names = Object.keys(BAD_FILES);
    const runs = await pool(names, 3, (name) =>
      offsetry(['fit', '--model', R6, '--data', join(ROOT, 'bad', name), '--out', join(dir, `bad-${name}.json`), '--report', join(dir, `bad-${name}.report.json`)]),
    );
    names.forEach((name, k) => {
      const r = runs[k];
      const spec = BAD_FILES[name];
      expect(r.code, `${name}: ${r.stderr}`).toBe(1);
      expect(r.stdout).toBe('');
      expect(r.stderr).toContain(`cannot read the session file ${join(ROOT, 'bad', name)}`);
      expect(r.stderr).toMatch(spec.problem);
      if (spec.line !== undefined) expect(r.stderr).toContain(`line ${spec.line}`);
      if (spec.column !== undefined) expect(r.stderr).toContain(`field ${spec.column}`);
      expect(existsSync(join(dir, `bad-${name}.json`))).toBe(false);
      expect(existsSync(join(dir, `bad-${name}.report.json`))).toBe(false);
    });
    noTempFiles();
  }, 240_000); // ~30 process starts; slow when the machine is busy

  it('bad geometry files exit 1 with line and field', async () => {
    const cases: [string, RegExp][] = [
      ['geometry-malformed.json', /line \d+: malformed JSON at column \d+/],
      ['geometry-unknown-convention.json', /line 4, field convention: unknown convention/],
      ['geometry-duplicate-joint.json', /field joints\[4\]\.name: joint name "J4" is used twice/],
      ['geometry-missing-type.json', /field joints\[3\]\.type/],
    ];
    const runs = await Promise.all(cases.map(([f]) => offsetry(['fit', '--model', join(ROOT, 'bad', f), '--data', R6_SESSION, '--out', join(dir, `g-${f}`)])));
    cases.forEach(([f, re], k) => {
      expect(runs[k].code).toBe(1);
      expect(runs[k].stderr).toContain(`cannot read the geometry file ${join(ROOT, 'bad', f)}`);
      expect(runs[k].stderr).toMatch(re);
      expect(existsSync(join(dir, `g-${f}`))).toBe(false);
    });
  });

  it('joints outside the limits: refused (existing output kept), accepted with --allow-outside-limits', async () => {
    const text = readFileSync(R6_SESSION, 'utf8').split('\n');
    const cells = text[10].split(','); // line 11: P10, visited once
    expect(cells[0]).toBe('P10');
    cells[1] = '171.25'; // J1 limit is ±165
    text[10] = cells.join(',');
    const session = join(dir, 'outside.csv');
    writeFileSync(session, text.join('\n'));
    const out = join(dir, 'outside-cal.json');
    writeFileSync(out, 'previous content');
    const refused = await offsetry(['fit', '--model', R6, '--data', session, '--out', out]);
    expect(refused.code).toBe(1);
    expect(refused.stderr).toMatch(/line 11, field q1: joint J1 reading 171\.25 deg is outside the model's limits/);
    expect(refused.stderr).toMatch(/--allow-outside-limits/);
    expect(readFileSync(out, 'utf8')).toBe('previous content');
    const accepted = await offsetry(['fit', '--model', R6, '--data', session, '--out', out, '--allow-outside-limits']);
    expect(accepted.code, accepted.stderr).toBe(0);
    expect(accepted.stderr).toMatch(/warning: .*line 11, field q1/);
    expect(parseGeometry(readFileSync(out, 'utf8'), out).format).toBe('offsetry-arm/1');
  });

  it('fewer poses than identifiable parameters exits 1 and writes nothing', async () => {
    const session = join(dir, 'few.csv');
    writeFileSync(session, readFileSync(R6_SESSION, 'utf8').split('\n').slice(0, 9).join('\n') + '\n');
    const out = join(dir, 'few-cal.json');
    const r = await offsetry(['fit', '--model', R6, '--data', session, '--out', out, '--holdout', '0']);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/cannot fit .* to .*few\.csv/);
    expect(r.stderr).toContain('few.csv');
    expect(existsSync(out)).toBe(false);
    noTempFiles();
  });

  it('refuses an output that would overwrite an input', async () => {
    const model = join(dir, 'model-copy.json');
    writeFileSync(model, readFileSync(R6));
    const r = await offsetry(['fit', '--model', model, '--data', R6_SESSION, '--out', model]);
    expect(r).toMatchObject({ code: 2, stderr: expect.stringMatching(/would overwrite the input --model/) });
    expect(readFileSync(model, 'utf8')).toBe(readFileSync(R6, 'utf8'));
  });

  it('a missing input file or output folder exits 1 before any work', async () => {
    const [noModel, noDir] = await Promise.all([
      offsetry(['fit', '--model', join(dir, 'nope.json'), '--data', R6_SESSION, '--out', join(dir, 'n.json')]),
      offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', join(dir, 'no-such-folder', 'n.json')]),
    ]);
    expect(noModel).toMatchObject({ code: 1, stderr: expect.stringMatching(/nope\.json: geometry file not found/) });
    expect(noDir).toMatchObject({ code: 1, stderr: expect.stringMatching(/the folder .*no-such-folder does not exist/) });
  });
});

describe('offsetry check', () => {
  it('prints the nominal error statistics after registering the tracker frame', async () => {
    const r = await offsetry(['check', '--model', R6, '--data', R6_SESSION]);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/85 poses, measurement frame registered/);
    const m = /RMS\s+mean\s+p95\s+max\n\s+(\d+\.\d+) mm/.exec(r.stdout);
    expect(m).not.toBeNull();
    expect(Number(m![1])).toBeGreaterThan(0.5); // the invented unit is about 1 mm off its nominal
  });

  it('a bad session exits 1 with the located problem', async () => {
    const r = await offsetry(['check', '--model', R6, '--data', join(ROOT, 'bad', 'nan-cell.csv')]);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/nan-cell\.csv, line 2, field x: NaN is not a measured value/);
  });
});

describe('offsetry plan', () => {
  it('writes a pose plan that reads back as a session header with joints inside the limits', async () => {
    const out = join(dir, 'plan.csv');
    const r = await offsetry(['plan', '--model', R6, '--count', '30', '--out', out, '--seed', '3']);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/Planned 30 poses/);
    const text = readFileSync(out, 'utf8');
    const lines = text.trim().split('\n');
    expect(lines[0]).toBe('pose,q1,q2,q3,q4,q5,q6');
    expect(lines).toHaveLength(31);
    // a plan plus measured columns is a session: check limits with the session parser
    const asSession = lines.map((l, k) => (k === 0 ? `${l},x,y,z` : `${l},0,0,0`)).join('\n');
    const geometry = parseGeometry(readFileSync(R6, 'utf8'), R6);
    const parsed = await parseSessionCsv(asSession, { fileName: 'plan.csv', geometry });
    expect(parsed.ok).toBe(true);
  });

  it('a bad count exits 2 and writes nothing', async () => {
    const out = join(dir, 'plan-bad.csv');
    const r = await offsetry(['plan', '--model', R6, '--count', 'many', '--out', out]);
    expect(r.code).toBe(2);
    expect(r.stderr).toMatch(/--count: "many" is not valid/);
    expect(existsSync(out)).toBe(false);
  });
});

describe('offsetry fit: robust loss, exclusions, instrument noise and warnings', () => {
  it('--loss huber --exclude P12,P30 --noise-mm 0.02: excluded poses, sandwich note, noise in the summary and report', async () => {
    const out = join(dir, 'robust.json'), rep = join(dir, 'robust-report.json');
    const r = await offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', out, '--report', rep, '--loss', 'huber', '--exclude', 'P12,P30', '--noise-mm', '0.02']);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/, 2 excluded\./);
    expect(r.stdout).toMatch(/Loss: huber \(scale 0\.050 mm\); instrument noise 0\.020 mm per coordinate/);
    expect(r.stdout).toContain('sandwich estimator');
    expect(r.stdout).toMatch(/conditional on the \d+ parameters? held at nominal/);
    const report = JSON.parse(readFileSync(rep, 'utf8'));
    expect(report.options).toMatchObject({ robust: 'huber', exclude: ['P12', 'P30'], noiseMm: 0.02 });
    expect(report.poses.filter((p: { role: string }) => p.role === 'excluded').map((p: { label: string }) => p.label)).toEqual(['P12', 'P30']);
    expect(Array.isArray(report.warnings)).toBe(true);
  });

  it('a session where every joint moves only ±15° prints warnings naming the joints and the pose planner', async () => {
    const { forwardPoint } = await import('../../src/lib/engine/kinematics');
    const truth = parseGeometry(readFileSync(join(ROOT, 'orrin-r6-620-true.json'), 'utf8'), 'orrin-r6-620-true.json');
    const r01 = seededRandom(7);
    const rows = ['pose,' + truth.joints.map((_, k) => `q${k + 1}`).join(',') + ',x,y,z'];
    for (let k = 0; k < 80; k++) {
      const q = truth.joints.map((j) => ((j.min ?? -180) + (j.max ?? 180)) / 2 + 15 * (2 * r01() - 1));
      // Tracker-like noise, 0.02 mm per coordinate.
      const p = forwardPoint(truth, q).map((v) => v + 0.02 * normalVariate(r01));
      rows.push([`N${k + 1}`, ...q.map((v) => v.toFixed(4)), ...p.map((v) => v.toFixed(4))].join(','));
    }
    const session = join(dir, 'narrow.csv');
    writeFileSync(session, rows.join('\n') + '\n');
    const r = await offsetry(['fit', '--model', R6, '--data', session, '--out', join(dir, 'narrow.json'), '--holdout', '0']);
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toMatch(/Warnings:\n  \[warning\] Joints barely move over the fit poses: J1 spans/);
    expect(r.stdout).toMatch(/→ Measure again moving J1, J2, J3, J4, J5, J6 over more of their range\. The pose planner/);
    expect(r.stdout).toMatch(/\[warning\] \d+ standard errors are above this arm's limits/);
  });

  it('bad --loss, --noise-mm or --exclude values exit 2 (usage) or 1 (unknown pose) and write nothing', async () => {
    const out = join(dir, 'never.json');
    const [loss, noise, empty, unknown] = await Promise.all([
      offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', out, '--loss', 'squared']),
      offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', out, '--noise-mm=-0.1']),
      offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', out, '--exclude', 'P12,,P30']),
      offsetry(['fit', '--model', R6, '--data', R6_SESSION, '--out', out, '--exclude', 'P999']),
    ]);
    expect(loss).toMatchObject({ code: 2, stderr: expect.stringMatching(/--loss: "squared" is not valid \(expected huber, cauchy or none\)/) });
    expect(noise).toMatchObject({ code: 2, stderr: expect.stringMatching(/--noise-mm: "-0.1" is not valid/) });
    expect(empty).toMatchObject({ code: 2, stderr: expect.stringMatching(/--exclude: "P12,,P30" has an empty pose label/) });
    expect(unknown.code).toBe(1);
    expect(unknown.stderr).toMatch(/no pose labelled "P999" to exclude/);
    expect(existsSync(out)).toBe(false);
  });
});
