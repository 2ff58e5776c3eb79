/**
 * The one CSV writer (src/lib/shared/csv.ts): read back with csv-parse and with a reader from outside the
 * project (Python's standard csv module via python3), numbers stay numbers, formula-like text is neutralised.
 */
import { execFileSync } from 'node:child_process';
import { parse } from 'csv-parse/sync';
import { describe, expect, it } from 'vitest';
import { csvCellText, csvText } from '../../src/lib/shared/csv';
import { planToCsv, sessionToCsv } from '../../src/lib/engine/session-csv';
import { parametersCsv } from '../../src/lib/server/parameter-set-files';
import { testArm } from '../support/approved-sets';

const PYTHON = process.env.PYTHON || 'python3';

/** Python's csv module (docs.python.org/3/library/csv.html), default "excel" dialect. */
function pythonRows(text: string): string[][] {
  const out = execFileSync(PYTHON, ['-c', 'import csv, sys, json; print(json.dumps(list(csv.reader(sys.stdin.read().splitlines(True)))))'], { input: text });
  return JSON.parse(out.toString());
}

const RISKY = ['=1+2', '+SUM(A1)', '-2+3', '@cmd', '\tTAB', '\rCR', '  =HYPERLINK("http://x")', '＝1', 'a,b', 'say "hi"', 'two\nlines', ' padded '];

describe('csvText', () => {
  const rows = [['label', 'value', 'text'], ...RISKY.map((t, i) => [`r${i}`, -1.25e-7 * (i + 1), t]), ['neg', -0, '-1.5'], ['big', 1 / 3, null]];
  const text = csvText(rows);

  it('neutralises every text cell a spreadsheet would run, keeps numbers as numbers', () => {
    for (const reader of [parse(text) as string[][], pythonRows(text)]) {
      expect(reader[0]).toEqual(['label', 'value', 'text']);
      RISKY.forEach((t, i) => {
        const [, v, cell] = reader[i + 1]!;
        // A negative number is still a plain number, read back to the same double.
        expect(Number(v)).toBe(-1.25e-7 * (i + 1));
        expect(v).not.toMatch(/^'/);
        const risky = /^[ ]*[=+\-@＝]|^[\t\r]/.test(t);
        expect(cell, JSON.stringify(t)).toBe(risky ? `'${t}` : t);
      });
      // -0 is written as 0; a plain numeric string is data, not a formula.
      expect(reader.at(-2)).toEqual(['neg', '0', '-1.5']);
      expect(Number(reader.at(-1)![1])).toBe(1 / 3);
      expect(reader.at(-1)![2]).toBe('');
    }
    // No cell in the file begins with a formula character (after quoting is removed).
    for (const r of parse(text) as string[][]) for (const c of r.slice(2)) expect(c).not.toMatch(/^[=+@\t\r]|^-[^\d.]/);
  });

  it('uses CRLF by default and LF on request, and ends with a line end', () => {
    expect(text.endsWith('\r\n')).toBe(true);
    expect(csvText([['a', 1]], { eol: '\n' })).toBe('a,1\n');
    expect(csvCellText(Number.NaN)).toBe('');
    expect(csvCellText(true)).toBe('true');
  });
});

describe('every CSV the product writes goes through the writer', () => {
  it('parameter export: a joint named like a formula is neutralised, numbers stay numbers', () => {
    const nominal = testArm();
    nominal.joints[0]!.name = '=HYPERLINK("http://evil.example","x")';
    nominal.joints[1]!.name = '-J2';
    const calibrated = JSON.parse(JSON.stringify(nominal));
    calibrated.joints[0].a = 299.87654321;
    const text = parametersCsv(nominal, calibrated, { 'J1.a': 0.002 });
    for (const rows of [parse(text) as string[][], pythonRows(text)]) {
      const j1a = rows.find((r) => r[0] === 'J1.a')!;
      expect(j1a[1]).toBe(`'=HYPERLINK("http://evil.example","x")`);
      expect(Number(j1a[6])).toBe(299.87654321 - 300);
      expect(j1a[6]!.startsWith('-')).toBe(true);
      expect(rows.find((r) => r[0] === 'J2.a')![1]).toBe(`'-J2`);
    }
  });

  it('session file writer and pose plan writer', () => {
    const poses = [{ label: '@SUM(1)', line: 2, q: [-1.5, 2, 3], x: -100.25, y: 0, z: 1e-9 }];
    const s = parse(sessionToCsv(poses, 3)) as string[][];
    expect(s[1]).toEqual(["'@SUM(1)", '-1.5', '2', '3', '-100.25', '0', '1e-9']);
    const p = pythonRows(planToCsv([[-10.0004, 0, 5]], testArm()));
    expect(p).toEqual([['pose', 'q1', 'q2', 'q3'], ['P1', '-10', '0', '5']]);
  });
});
