/**
 * Writes the invented sample files in test-data/ (run: `npx tsx tests/engine/make-test-data.ts`).
 * The output is committed; tests read it and check that it still matches this script's arms.
 *
 * Everything here is made up for Offsetry: the arm models "Orrin R6-620" (six axes, modified DH, beta on the
 * nearly parallel J3) and "Orrin S4-410" (four axes with a prismatic axis), their "true" geometries (nominal
 * plus small invented errors and a tracker placement), and the sessions measured on them with
 * tracker-like noise (0.02 mm standard deviation per coordinate).
 */
import { mkdirSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { serializeGeometry } from '../../src/lib/engine/geometry';
import { sessionToCsv } from '../../src/lib/engine/session-csv';
import type { ArmGeometry, SessionPose } from '../../src/lib/engine/types';
import { normalVariate, seededRandom } from '../../src/lib/engine/random';

export const ROOT = join(dirname(fileURLToPath(import.meta.url)), '..', '..', 'test-data');
export const NOISE_MM = 0.02;

/** Seeded uniform generator (the engine's mulberry32). */
const rng = seededRandom;
const gauss = normalVariate;
const round = (v: number, digits: number) => Number(v.toFixed(digits));

export function r6Nominal(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Orrin R6-620',
    convention: 'mdh',
    joints: [
      { name: 'J1', type: 'revolute', a: 0, alpha: 0, d: 380, theta: 0, min: -165, max: 165 },
      { name: 'J2', type: 'revolute', a: 60, alpha: -90, d: 0, theta: -90, min: -110, max: 70 },
      { name: 'J3', type: 'revolute', a: 470, alpha: 0, d: 0, theta: 0, beta: 0, min: -100, max: 140 },
      { name: 'J4', type: 'revolute', a: 40, alpha: -90, d: 455, theta: 0, min: -175, max: 175 },
      { name: 'J5', type: 'revolute', a: 0, alpha: 90, d: 0, theta: 0, min: -115, max: 115 },
      { name: 'J6', type: 'revolute', a: 0, alpha: -90, d: 85, theta: 0, min: -340, max: 340 },
    ],
    tool: { x: 0, y: 0, z: 110, rx: 0, ry: 0, rz: 0 },
  };
}

/** The "true" Orrin R6-620 unit LAB-R6-0417: nominal plus invented errors, placed in the tracker frame. */
export function r6True(): ArmGeometry {
  const g = r6Nominal();
  const err: [number, number, number, number, number?][] = [
    // a (mm), alpha (deg), d (mm), theta (deg), beta (deg)
    [0, 0.0, 0.0, 0.0],
    [0.21, -0.031, 0.0, 0.044],
    [-0.34, 0.018, 0.0, -0.027, 0.036],
    [0.15, 0.026, -0.28, 0.052],
    [-0.09, -0.041, 0.0, -0.019],
    [0.0, 0.022, 0.17, 0.0],
  ];
  g.joints.forEach((j, i) => {
    const [da, dal, dd, dth, dbe] = err[i];
    j.a += da;
    j.alpha += dal;
    j.d += dd;
    j.theta += dth;
    if (dbe !== undefined) j.beta = (j.beta ?? 0) + dbe;
  });
  g.name = 'Orrin R6-620 unit LAB-R6-0417 (invented true geometry)';
  g.base = { x: 2150.4, y: -640.2, z: -310.7, rx: 0.12, ry: -0.08, rz: 28.5 };
  g.tool = { x: 0.42, y: -0.31, z: 110.55, rx: 0, ry: 0, rz: 0 };
  return g;
}

export function s4Nominal(): ArmGeometry {
  return {
    format: 'offsetry-arm/1',
    name: 'Orrin S4-410',
    convention: 'dh',
    joints: [
      { name: 'J1', type: 'revolute', a: 270, alpha: 0, d: 310, theta: 0, min: -140, max: 140 },
      { name: 'J2', type: 'revolute', a: 180, alpha: 180, d: 0, theta: 0, min: -145, max: 145 },
      { name: 'J3', type: 'prismatic', a: 0, alpha: 0, d: 0, theta: 0, min: 0, max: 180 },
      { name: 'J4', type: 'revolute', a: 0, alpha: 0, d: 35, theta: 0, min: -360, max: 360 },
    ],
    tool: { x: 25, y: 0, z: 60, rx: 0, ry: 0, rz: 0 },
  };
}

export function s4True(): ArmGeometry {
  const g = s4Nominal();
  const err: [number, number, number, number][] = [
    [0.26, 0.012, 0.0, 0.031],
    [-0.19, -0.015, 0.0, -0.047],
    [0.05, 0.009, 0.0, 0.0],
    [0.0, 0.0, 0.12, 0.0],
  ];
  g.joints.forEach((j, i) => {
    const [da, dal, dd, dth] = err[i];
    j.a += da;
    j.alpha += dal;
    j.d += dd;
    j.theta += dth;
  });
  g.name = 'Orrin S4-410 unit LAB-S4-0093 (invented true geometry)';
  g.base = { x: -820.3, y: 1310.8, z: -95.2, rx: -0.05, ry: 0.07, rz: -112.0 };
  g.tool = { x: 25.18, y: -0.22, z: 60.31, rx: 0, ry: 0, rz: 0 };
  return g;
}

function randomQ(g: ArmGeometry, r: () => number, shrink = 0.85): number[] {
  // Uniform inside the limits shrunk about their middle (technicians stay clear of the end stops).
  return g.joints.map((j) => {
    const min = j.min ?? -180;
    const max = j.max ?? 180;
    const mid = (min + max) / 2;
    const a = mid + (min - mid) * shrink;
    const b = mid + (max - mid) * shrink;
    return round(a + (b - a) * r(), 3); // encoder resolution 0.001 deg / mm
  });
}

function measure(truth: ArmGeometry, q: number[], r: () => number): [number, number, number] {
  const p = forwardPoint(truth, q);
  return [round(p[0] + NOISE_MM * gauss(r), 4), round(p[1] + NOISE_MM * gauss(r), 4), round(p[2] + NOISE_MM * gauss(r), 4)];
}

/**
 * A session: `count` distinct poses, the first `repeatPoses` of them visited `repeatVisits` times in all
 * (ISO 9283 repeat visits, appended at the end as a technician would do), and when `validateEvery` is set,
 * every k-th distinct pose marked split=validate.
 */
export function makeSession(
  truth: ArmGeometry,
  opts: { count: number; seed: number; repeatPoses?: number; repeatVisits?: number; validateEvery?: number },
): SessionPose[] {
  const r = rng(opts.seed);
  const poses: SessionPose[] = [];
  const width = String(opts.count).length;
  const qs: number[][] = [];
  for (let i = 0; i < opts.count; i++) {
    const q = randomQ(truth, r);
    qs.push(q);
    const [x, y, z] = measure(truth, q, r);
    const pose: SessionPose = { label: `P${String(i + 1).padStart(width, '0')}`, line: poses.length + 2, q, x, y, z };
    if (opts.validateEvery) pose.split = (i + 1) % opts.validateEvery === 0 ? 'validate' : 'fit';
    poses.push(pose);
  }
  for (let v = 1; v < (opts.repeatVisits ?? 1); v++) {
    for (let i = 0; i < (opts.repeatPoses ?? 0); i++) {
      const [x, y, z] = measure(truth, qs[i], r);
      poses.push({ ...poses[i], line: poses.length + 2, x, y, z });
    }
  }
  return poses;
}

function write(rel: string, content: string | Uint8Array) {
  const path = join(ROOT, rel);
  mkdirSync(dirname(path), { recursive: true });
  writeFileSync(path, content);
}

/** Small bad-input files, one per case; the manifest says what each must trigger. */
export const BAD_FILES: Record<string, { content: string | Uint8Array; problem: RegExp; line?: number; column?: string }> = {};

function bad(name: string, content: string | Uint8Array, problem: RegExp, line?: number, column?: string) {
  BAD_FILES[name] = { content, problem, line, column };
}

function buildBad() {
  const H = 'pose,q1,q2,q3,q4,q5,q6,x,y,z';
  const r1 = 'P1,10,-20,30,0,45,0,2180.5123,-512.3301,640.1102';
  const r2 = 'P2,-15,-35,55,20,-30,90,2050.2231,-820.7704,720.4455';
  bad('empty.csv', '', /the file is empty/, 1);
  bad('header-only.csv', `${H}\n`, /header but no data rows/, 2);
  bad('semicolon-delimiter.csv', `${H.replace(/,/g, ';')}\n${r1.replace(/,/g, ';')}\n`, /wrong delimiter: .*";"/, 1);
  bad('tab-delimiter.csv', `${H.replace(/,/g, '\t')}\n${r1.replace(/,/g, '\t')}\n`, /wrong delimiter: .*tabs/, 1);
  bad('semicolon-decimal-comma.csv', `${H.replace(/,/g, ';')}\n${r1.replace(/,/g, ';').replace(/\./g, ',')}\n`, /decimal comma/, 1);
  bad('decimal-comma.csv', `${H}\nP1,10,-20,30,0,45,0,2180,5123,-512,3301,640,1102\n`, /decimal comma/, 2);
  bad('missing-joint-column.csv', `pose,q1,q2,q3,q4,q5,x,y,z\nP1,10,-20,30,0,45,2180.5,-512.3,640.1\n`, /missing joint column q6: the model "Orrin R6-620" has 6 joints/, 1, 'q6');
  bad('extra-joint-column.csv', `pose,q1,q2,q3,q4,q5,q6,q7,x,y,z\nP1,10,-20,30,0,45,0,5,2180.5,-512.3,640.1\n`, /extra joint column q7: the model "Orrin R6-620" has 6 joints/, 1, 'q7');
  bad('missing-xyz-column.csv', `pose,q1,q2,q3,q4,q5,q6,x,y\nP1,10,-20,30,0,45,0,2180.5,-512.3\n`, /missing column "z"/, 1, 'z');
  bad('duplicate-header-column.csv', `pose,q1,q2,q3,q4,q5,q6,x,y,z,q2\n${r1},-20\n`, /duplicated header column "q2"/, 1, 'q2');
  bad('header-repeated.csv', `${H}\n${r1}\n${H}\n${r2}\n`, /header is repeated as a data row/, 3);
  bad('non-numeric-cell.csv', `${H}\n${r1}\n${r2.replace('-35', 'abc')}\n`, /"abc" is not a number/, 3, 'q2');
  bad('nan-cell.csv', `${H}\n${r1.replace('2180.5123', 'NaN')}\n`, /NaN is not a measured value/, 2, 'x');
  bad('infinity-cell.csv', `${H}\n${r1.replace('640.1102', 'Infinity')}\n`, /Infinity is not a measured value/, 2, 'z');
  bad('empty-cell.csv', `${H}\n${r1.replace(',45,', ',,')}\n`, /empty cell/, 2, 'q5');
  bad('blank-lines-then-error.csv', `${H}\n\n${r1}\n\n\n${r2.replace('-30', 'x5')}\n`, /"x5" is not a number/, 6, 'q5');
  bad('outside-limits.csv', `${H}\n${r1}\n${r2.replace(',-15,', ',171.5,')}\n`, /joint J1 reading 171.5 deg is outside the model's limits/, 3, 'q1');
  bad('duplicate-label.csv', `${H}\n${r1}\n${r2}\n${r1.replace(',10,', ',11,')}\n`, /duplicate pose label "P1" is not a repeat: joints differ from line 2/, 4, 'pose');
  bad('unknown-split-value.csv', `${H},split\n${r1},fit\n${r2},later\n`, /unknown split value "later"/, 3, 'split');
  bad('unclosed-quote.csv', `${H}\n${r1}\n"P2,1,2,3,4,5,6,7,8,9\n`, /quoted field is never closed/, 3);
  // Not text at all: signatures of PNG, ZIP and PDF, a NUL byte, invalid UTF-8.
  bad('not-csv.png', new Uint8Array([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13, 0x49, 0x48, 0x44, 0x52]), /not a CSV text file: it looks like a PNG image/, 1);
  bad('not-csv.zip', new Uint8Array([0x50, 0x4b, 0x03, 0x04, 20, 0, 0, 0, 8, 0]), /not a CSV text file: it looks like a ZIP archive/, 1);
  bad('not-csv.pdf', `%PDF-1.4\n1 0 obj << /Type /Catalog >> endobj\n`, /not a CSV text file: it looks like a PDF document/, 1);
  bad('nul-bytes.csv', new Uint8Array([...new TextEncoder().encode(`${H}\n${r1}\n`), 0x50, 0x33, 0x00, 0x2c]), /NUL bytes/, 3);
  bad('invalid-utf8.csv', new Uint8Array([...new TextEncoder().encode(`${H}\nP1 `), 0xc3, 0x28, ...new TextEncoder().encode(',1,2,3,4,5,6,7,8,9\n')]), /not valid UTF-8/, 2);
}

/** Files that must parse: byte-order mark, Windows line ends, blank lines, unknown column. */
export const GOOD_VARIANTS: Record<string, { content: string; poses: number; lines: number[] }> = {};

function buildGoodVariants() {
  const H = 'pose,q1,q2,q3,q4,q5,q6,x,y,z';
  const r1 = 'P1,10,-20,30,0,45,0,2180.5123,-512.3301,640.1102';
  const r2 = 'P2,-15,-35,55,20,-30,90,2050.2231,-820.7704,720.4455';
  GOOD_VARIANTS['bom.csv'] = { content: `\ufeff${H}\n${r1}\n${r2}\n`, poses: 2, lines: [2, 3] };
  GOOD_VARIANTS['windows-line-ends.csv'] = { content: `${H}\r\n${r1}\r\n${r2}\r\n`, poses: 2, lines: [2, 3] };
  GOOD_VARIANTS['blank-lines.csv'] = { content: `${H}\n\n${r1}\n\n   \n${r2}\n\n`, poses: 2, lines: [3, 6] };
  GOOD_VARIANTS['unknown-column.csv'] = { content: `${H},operator\n${r1},kim\n${r2},kim\n`, poses: 2, lines: [2, 3] };
}
buildBad();
buildGoodVariants();

function main() {
  write('orrin-r6-620-nominal.json', serializeGeometry(r6Nominal()));
  write('orrin-r6-620-true.json', serializeGeometry(r6True()));
  write('orrin-s4-410-nominal.json', serializeGeometry(s4Nominal()));
  write('orrin-s4-410-true.json', serializeGeometry(s4True()));
  // 60 distinct poses, every 5th held out by the split column, 5 poses visited 6 times in all (ISO 9283).
  const r6 = makeSession(r6True(), { count: 60, seed: 620, repeatPoses: 5, repeatVisits: 6, validateEvery: 5 });
  write('orrin-r6-620-session.csv', sessionToCsv(r6, 6));
  const s4 = makeSession(s4True(), { count: 40, seed: 410 });
  write('orrin-s4-410-session.csv', sessionToCsv(s4, 4));
  for (const [name, f] of Object.entries(BAD_FILES)) write(join('bad', name), f.content);
  for (const [name, f] of Object.entries(GOOD_VARIANTS)) write(join('variants', name), f.content);
  // Bad geometry files for the CLI and the geometry tests.
  const nominal = serializeGeometry(r6Nominal());
  write('bad/geometry-malformed.json', nominal.replace('"convention": "mdh",', '"convention": "mdh"'));
  write('bad/geometry-unknown-convention.json', nominal.replace('"convention": "mdh"', '"convention": "denavit"'));
  write('bad/geometry-duplicate-joint.json', nominal.replace('"name": "J5"', '"name": "J4"'));
  write('bad/geometry-missing-type.json', nominal.replace(/"type": "revolute",\n(\s+"a": 40,)/, '$1'));
  console.log(`wrote ${ROOT}`);
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) main();
