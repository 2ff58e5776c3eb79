import { describe, expect, it } from 'vitest';
import { createReadStream, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { Readable } from 'node:stream';
import { parseSessionCsv, planToCsv, sessionToCsv, type ParseSessionResult } from '../../src/lib/engine/session-csv';
import { parseGeometry } from '../../src/lib/engine/geometry';
import type { ArmGeometry, SessionPose } from '../../src/lib/engine/types';
import { BAD_FILES, GOOD_VARIANTS, ROOT, s4True, makeSession, r6Nominal, r6True } from './make-test-data';

const r6 = r6Nominal();

function failed(r: ParseSessionResult) {
  if (r.ok) throw new Error('expected the parse to fail');
  return r;
}
function passed(r: ParseSessionResult) {
  if (!r.ok) throw new Error('expected the parse to pass: ' + JSON.stringify(r.problems));
  return r;
}

describe('parseSessionCsv: committed sample sessions', () => {
  it('reads the Orrin R6-620 session with split column and repeat visits, identical to the generator', async () => {
    const expected = makeSession(r6True(), { count: 60, seed: 620, repeatPoses: 5, repeatVisits: 6, validateEvery: 5 });
    const r = passed(await parseSessionCsv(createReadStream(join(ROOT, 'orrin-r6-620-session.csv')), { fileName: 'orrin-r6-620-session.csv', geometry: r6 }));
    expect(r.poses).toEqual(expected);
    expect(r.hasSplit).toBe(true);
    expect(r.repeatGroups).toBe(5);
    expect(r.poses.filter((p) => p.split === 'validate')).toHaveLength(12 + 5); // 12 distinct, P05's 5 repeats
    expect(r.warnings).toEqual([]);
    expect(r.bytes).toBe(readFileSync(join(ROOT, 'orrin-r6-620-session.csv')).byteLength);
  });

  it('reads the Orrin S4-410 session (prismatic joint in mm)', async () => {
    const g = parseGeometry(readFileSync(join(ROOT, 'orrin-s4-410-nominal.json'), 'utf8'), 'orrin-s4-410-nominal.json');
    const r = passed(await parseSessionCsv(readFileSync(join(ROOT, 'orrin-s4-410-session.csv'), 'utf8'), { fileName: 's4', geometry: g }));
    expect(r.poses).toEqual(makeSession(s4True(), { count: 40, seed: 410 }));
    expect(r.hasSplit).toBe(false);
    expect(r.repeatGroups).toBe(0);
  });
});

describe('parseSessionCsv: every bad-input case (test-data/bad)', () => {
  for (const [name, spec] of Object.entries(BAD_FILES)) {
    it(`${name}: ${spec.problem.source}`, async () => {
      // read the committed file as a byte stream, the way an upload arrives
      const committed = readFileSync(join(ROOT, 'bad', name));
      expect(Buffer.compare(committed, Buffer.from(spec.content))).toBe(0);
      const r = failed(await parseSessionCsv(Readable.from([committed]), { fileName: name, geometry: r6 }));
      const hit = r.problems.find((p) => spec.problem.test(p.message));
      expect(hit, JSON.stringify(r.problems)).toBeDefined();
      expect(hit!.file).toBe(name);
      if (spec.line !== undefined) expect(hit!.line).toBe(spec.line);
      if (spec.column !== undefined) expect(hit!.column).toBe(spec.column);
      expect(r.truncated).toBe(false);
    });
  }

  it('says what was expected: the model joint count and the header', async () => {
    const r = failed(await parseSessionCsv(BAD_FILES['missing-joint-column.csv'].content as string, { fileName: 'm.csv', geometry: r6 }));
    expect(r.problems[0].expected).toBe('header pose,q1,…,q6,x,y,z');
  });
});

describe('parseSessionCsv: accepted variants', () => {
  for (const [name, spec] of Object.entries(GOOD_VARIANTS)) {
    it(name, async () => {
      const committed = readFileSync(join(ROOT, 'variants', name));
      const r = passed(await parseSessionCsv(Readable.from([committed]), { fileName: name, geometry: r6 }));
      expect(r.poses).toHaveLength(spec.poses);
      expect(r.poses.map((p) => p.line)).toEqual(spec.lines);
      expect(r.poses[0]).toMatchObject({ label: 'P1', q: [10, -20, 30, 0, 45, 0], x: 2180.5123, y: -512.3301, z: 640.1102 });
      expect(r.poses[0].split).toBeUndefined();
    });
  }

  it('warns about an unknown column and ignores it', async () => {
    const r = passed(await parseSessionCsv(GOOD_VARIANTS['unknown-column.csv'].content, { fileName: 'u.csv', geometry: r6 }));
    expect(r.warnings).toEqual([{ file: 'u.csv', line: 1, column: 'operator', message: 'unknown column "operator" is ignored' }]);
  });

  it('accepts columns in any order, quoted labels and an empty split cell', async () => {
    const text = 'x,y,z,split,q6,q5,q4,q3,q2,q1,pose\n1,2,3,,6,5,4,3,2,1,"P,1"\n1,2,3,validate,6,5,4,3,2,1,P2\n';
    const r = passed(await parseSessionCsv(text, { fileName: 'o.csv', geometry: r6 }));
    expect(r.poses[0]).toEqual({ label: 'P,1', line: 2, q: [1, 2, 3, 4, 5, 6], x: 1, y: 2, z: 3 });
    expect(r.poses[1].split).toBe('validate');
  });

  it('splits a stream at arbitrary byte boundaries (multi-byte characters and CRLF across chunks)', async () => {
    const text = '\ufeffpose,q1,q2,q3,q4,q5,q6,x,y,z\r\n"Pé1",1,2,3,4,5,6,7,8,9\r\n"Pé2",1,2,3,4,5,6,7,8,9\r\n';
    const bytes = Buffer.from(text, 'utf8');
    const chunks = Array.from(bytes).map((b) => Uint8Array.of(b)); // one byte per chunk
    const r = passed(await parseSessionCsv(Readable.from(chunks), { fileName: 'c.csv', geometry: r6 }));
    expect(r.poses.map((p) => [p.label, p.line])).toEqual([['Pé1', 2], ['Pé2', 3]]);
  });
});

describe('parseSessionCsv: limits and repeats', () => {
  const H = 'pose,q1,q2,q3,q4,q5,q6,x,y,z';

  it('joint values outside the limits: error by default, listed and accepted with the override', async () => {
    const text = `${H}\nP1,170,0,0,0,0,0,1,2,3\nP2,0,0,0,0,0,0,1,2,3\n`;
    const bad = failed(await parseSessionCsv(text, { fileName: 'l.csv', geometry: r6 }));
    expect(bad.problems).toEqual([
      expect.objectContaining({ line: 2, column: 'q1', expected: '-165 to 165 deg', message: expect.stringMatching(/J1 reading 170 deg is outside/) }),
    ]);
    const ok = passed(await parseSessionCsv(text, { fileName: 'l.csv', geometry: r6, allowOutsideLimits: true }));
    expect(ok.poses).toHaveLength(2);
    expect(ok.outsideLimits).toEqual([expect.objectContaining({ line: 2, column: 'q1' })]);
  });

  it('repeat visits within 1e-6 are accepted; a larger difference is a duplicate label', async () => {
    const rep = `${H}\nA,1,2,3,4,5,6,1,2,3\nB,0,0,0,0,0,0,1,2,3\nA,1.0000005,2,3,4,5,6,1.1,2,3\nA,1,2,3,4,5,6,1.2,2,3\n`;
    const r = passed(await parseSessionCsv(rep, { fileName: 'r.csv', geometry: r6 }));
    expect(r.repeatGroups).toBe(1);
    expect(r.poses.filter((p) => p.label === 'A').map((p) => p.line)).toEqual([2, 4, 5]);
    const dup = rep.replace('1.0000005', '1.00001');
    const d = failed(await parseSessionCsv(dup, { fileName: 'r.csv', geometry: r6 }));
    expect(d.problems[0]).toMatchObject({ line: 4, column: 'pose', message: 'duplicate pose label "A" is not a repeat: joints differ from line 2' });
  });

  it('caps the problem list and says it was truncated', async () => {
    const rows = Array.from({ length: 30 }, (_, i) => `P${i},x,0,0,0,0,0,1,2,3`).join('\n');
    const r = failed(await parseSessionCsv(`${H}\n${rows}\n`, { fileName: 't.csv', geometry: r6, maxProblems: 10 }));
    expect(r.problems).toHaveLength(10);
    expect(r.truncated).toBe(true);
    expect(r.problems.map((p) => p.line)).toEqual([2, 3, 4, 5, 6, 7, 8, 9, 10, 11]);
    const all = failed(await parseSessionCsv(`${H}\n${rows}\n`, { fileName: 't.csv', geometry: r6 }));
    expect(all.problems).toHaveLength(30);
    expect(all.truncated).toBe(false);
  });

  it('stops reading as soon as the size limit is passed', async () => {
    let pulled = 0;
    async function* endless() {
      yield `${H}\n`;
      for (;;) {
        pulled++;
        yield 'P1,1,2,3,4,5,6,1,2,3\n'.repeat(100); // 2 100 bytes
      }
    }
    const r = failed(await parseSessionCsv(endless(), { fileName: 'big.csv', geometry: r6, maxBytes: 10_000 }));
    expect(r.problems).toEqual([expect.objectContaining({ file: 'big.csv', message: expect.stringMatching(/larger than the limit of 9.8 KiB/) })]);
    expect(pulled).toBe(5); // 30 + 4·2100 < 10 000 < 30 + 5·2100
  });

  it('a file exactly at the limit is accepted', async () => {
    const text = `${H}\nP1,1,2,3,4,5,6,1,2,3\n`;
    passed(await parseSessionCsv(text, { fileName: 's.csv', geometry: r6, maxBytes: Buffer.byteLength(text) }));
    failed(await parseSessionCsv(text, { fileName: 's.csv', geometry: r6, maxBytes: Buffer.byteLength(text) - 1 }));
  });

  it('rejects a header that does not match the model, naming the joint count', async () => {
    const g: ArmGeometry = { ...r6, name: 'Two-axis', joints: r6.joints.slice(0, 2) };
    const r = failed(await parseSessionCsv(`${H}\nP1,1,2,3,4,5,6,1,2,3\n`, { fileName: 'h.csv', geometry: g }));
    expect(r.problems[0]).toMatchObject({ line: 1, column: 'q3', message: 'extra joint columns q3, q4, q5, q6: the model "Two-axis" has 2 joints' });
  });
});

describe('parseSessionCsv: line numbers and byte boundaries', () => {
  const H = 'pose,q1,q2,q3,q4,q5,q6,x,y,z';

  it('counts the lines inside a quoted multi-line field', async () => {
    const text = `${H}\n"two\nlines",1,2,3,4,5,6,7,8,9\nP2,1,2,3,4,5,6,7,8,x\n`;
    const r = failed(await parseSessionCsv(text, { fileName: 'q.csv', geometry: r6 }));
    expect(r.problems).toEqual([expect.objectContaining({ line: 4, column: 'z' })]);
  });

  it('a data row separated by semicolons under a comma header is located and explained', async () => {
    const r = failed(await parseSessionCsv(`${H}\nP1;1;2;3;4;5;6;7;8;9\n`, { fileName: 'd.csv', geometry: r6 }));
    expect(r.problems[0]).toMatchObject({ line: 2, message: expect.stringMatching(/1 field but the header has 10 — the row is separated by ";" or tabs/) });
  });

  it('invalid UTF-8 split across chunks, and a character cut at the end of the file', async () => {
    const start = Buffer.from(`${H}\nP1`);
    const r1 = failed(await parseSessionCsv(Readable.from([start, Uint8Array.of(0xc3), Uint8Array.of(0x28, 0x2c)]), { fileName: 'u.csv', geometry: r6 }));
    expect(r1.problems[0]).toMatchObject({ line: 2, message: 'not a CSV text file: the bytes are not valid UTF-8' });
    const r2 = failed(await parseSessionCsv(Readable.from([start, Uint8Array.of(0xe2, 0x82)]), { fileName: 'u.csv', geometry: r6 }));
    expect(r2.problems[0].message).toMatch(/truncated character at the end/);
    // a valid three-byte character split 1 + 2 is fine
    const ok = `${H}\n"P€",1,2,3,4,5,6,7,8,9\n`;
    const bytes = Buffer.from(ok);
    const cut = bytes.indexOf(0xe2) + 1;
    const r3 = passed(await parseSessionCsv(Readable.from([bytes.subarray(0, cut), bytes.subarray(cut)]), { fileName: 'u.csv', geometry: r6 }));
    expect(r3.poses[0].label).toBe('P€');
  });
});

describe('sessionToCsv / planToCsv', () => {
  it('writes a session that reads back identically, full precision', async () => {
    const poses: SessionPose[] = [
      { label: 'P1', line: 2, q: [0.1 + 0.2, -1 / 3, 1e-7, 45, 90, -179.999], x: 2180.123456789012, y: -1e-9, z: 1 / 7, split: 'fit' },
      { label: 'odd "label", yes', line: 3, q: [1, 2, 3, 4, 5, 6], x: 1, y: 2, z: 3 },
    ];
    const text = sessionToCsv(poses, 6);
    expect(text.split('\n')[0]).toBe('pose,q1,q2,q3,q4,q5,q6,x,y,z,split');
    const r = passed(await parseSessionCsv(text, { fileName: 'w.csv', geometry: r6 }));
    expect(r.poses).toEqual(poses);
  });

  it('writes a pose plan with header pose,q1..qn', () => {
    const text = planToCsv([[1, 2, 3, 4, 5, 6], [0.5, 0, 0, 0, 0, -0.25]], r6);
    expect(text).toBe('pose,q1,q2,q3,q4,q5,q6\nP1,1,2,3,4,5,6\nP2,0.5,0,0,0,0,-0.25\n');
    expect(() => planToCsv([[1, 2]], r6)).toThrow(/expected 6/);
    // rounded to 0.001 (deg / mm) by default; labels zero-padded to sort as text
    const many = planToCsv(Array.from({ length: 10 }, () => [1 / 3, -2 / 3, 1e-9, -1e-9, 179.99951, 0]), r6).split('\n');
    expect(many[1]).toBe('P01,0.333,-0.667,0,0,180,0');
    expect(many[10]).toMatch(/^P10,/);
  });
});
