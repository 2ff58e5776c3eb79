/**
 * The header of a session file mapped to columns: pose, q1…qn (one per joint of the model), x, y, z and
 * the optional split; unknown columns are ignored with a warning. A wrong delimiter (the whole header in
 * one field) is recognised and named, with a decimal comma in the data if there is one.
 */
import type { InputProblem } from './types';

/** Thrown to stop reading: the problem that caused it is already listed. */
export class StopReading extends Error {}

export type ProblemFn = (p: Omit<InputProblem, 'file'>) => void;

export const DECIMAL_COMMA_RE = /^[+-]?\d+,\d+$/;

/** Column of each field in the rows (indices into a record). */
export interface Header {
  pose: number;
  q: number[]; // column index of q1..qn
  x: number;
  y: number;
  z: number;
  split: number; // −1 when absent
  names: string[];
  count: number;
}

export function expectedHeader(n: number): string {
  const qs = n <= 3 ? Array.from({ length: n }, (_, k) => `q${k + 1}`).join(',') : `q1,…,q${n}`;
  return `pose,${qs},x,y,z`;
}

/**
 * Map the header record (line `line`) to columns for a model of n joints; `head` is the start of the
 * file (to tell a decimal comma in the data). Header problems make every row unreadable: `fatal` then.
 */
export function readHeader(
  rec: string[],
  line: number,
  n: number,
  modelName: string,
  head: string,
  problem: ProblemFn,
  fatal: ProblemFn,
  warnings: InputProblem[],
  file: string,
): Header {
  const names = rec.map((c) => c.trim().toLowerCase());
  const expected = `header ${expectedHeader(n)}`;

  // Wrong delimiter: the whole header landed in one field, split by ';' or a tab.
  if (names.length === 1) {
    const only = rec[0];
    const delim = only.includes(';') ? ';' : only.includes('\t') ? '\t' : only.includes('|') ? '|' : undefined;
    if (delim) {
      const shown = delim === '\t' ? 'tabs' : `"${delim}"`;
      const second = head.split(/\r?\n/).find((l, k) => k > 0 && l.trim() !== '') ?? '';
      const decimalComma = second.split(delim).some((c) => DECIMAL_COMMA_RE.test(c.trim()));
      problem({
        line,
        message: `wrong delimiter: the columns are separated by ${shown}, not commas${decimalComma ? ', and numbers use a decimal comma (e.g. "1,5")' : ''}`,
        expected: `comma-separated columns${decimalComma ? ' and a decimal point (1.5)' : ''}: ${expected}`,
      });
      throw new StopReading();
    }
  }

  const index = new Map<string, number>();
  names.forEach((name, k) => {
    if (name === '') {
      problem({ line, column: `column ${k + 1}`, message: `header column ${k + 1} has no name`, expected });
      return;
    }
    const first = index.get(name);
    if (first !== undefined) {
      problem({ line, column: name, message: `duplicated header column "${name}" (columns ${first + 1} and ${k + 1})`, expected: 'each column name once' });
    } else index.set(name, k);
  });

  const h: Header = { pose: -1, q: [], x: -1, y: -1, z: -1, split: -1, names, count: names.length };
  for (const required of ['pose', 'x', 'y', 'z'] as const) {
    const k = index.get(required);
    if (k === undefined) problem({ line, column: required, message: `missing column "${required}"`, expected });
    else h[required] = k;
  }
  const missing: string[] = [];
  for (let j = 1; j <= n; j++) {
    const k = index.get(`q${j}`);
    if (k === undefined) missing.push(`q${j}`);
    else h.q.push(k);
  }
  const extra: string[] = [];
  for (const name of index.keys()) {
    const m = /^q(\d+)$/.exec(name);
    if (m && (Number(m[1]) > n || Number(m[1]) < 1)) extra.push(name);
  }
  const jointColumns = (what: 'missing' | 'extra', columns: string[]) => problem({
    line,
    column: columns[0],
    message: `${what} joint column${columns.length > 1 ? 's' : ''} ${columns.join(', ')}: the model "${modelName}" has ${n} joint${n > 1 ? 's' : ''}`,
    expected,
  });
  if (missing.length) jointColumns('missing', missing);
  if (extra.length) jointColumns('extra', extra);
  const split = index.get('split');
  if (split !== undefined) h.split = split;
  const known = new Set(['pose', 'x', 'y', 'z', 'split']);
  for (const [name, k] of index) {
    if (known.has(name) || /^q\d+$/.test(name)) continue;
    warnings.push({ file, line, column: rec[k].trim(), message: `unknown column "${rec[k].trim()}" is ignored` });
  }
  // Header problems make every row unreadable: stop here.
  if (h.pose < 0 || h.x < 0 || h.y < 0 || h.z < 0 || missing.length || extra.length || names.length !== index.size) {
    fatal({ line, message: 'the rows cannot be read until the header is fixed', expected });
  }
  return h;
}
