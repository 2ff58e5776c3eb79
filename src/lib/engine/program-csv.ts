/**
 * The robot program files of compensation (CSV).
 *
 * Input (TARGETS.csv): header `target`, then either
 *   - Cartesian: `x,y,z` (mm) with optional `rx,ry,rz` (deg, R = Rz(rz)·Ry(ry)·Rx(rx)) and optional
 *     configuration hints `q1…qn` (deg / mm); without rx,ry,rz the targets are position only;
 *   - joint: `q1…qn` alone.
 * Columns in any order; every row must fill every column of the header. Unknown columns are refused
 * (a misspelt `rz` must not silently turn a program into position-only targets).
 *
 * Output (OUT.csv): `target,q1…qn,x,y,z,rx,ry,rz,status,message`, numbers at full double precision
 * (JavaScript's shortest round-trip form), written by the product's one CSV writer (csv-stringify) with spreadsheet formulas
 * neutralised in text cells (a target named "=1+2" is written as "'=1+2").
 *
 * Line numbers are physical lines from 1 (header = 1).
 */
import { parse } from 'csv-parse/sync';
import { csvText } from '../shared/csv';
import type { InputProblem } from './types';

export interface ProgramTarget {
  name: string;
  /** Physical line in the file (header = 1). */
  line: number;
  /** Cartesian targets: position (mm) and, when the file has rx,ry,rz, orientation (deg). */
  pose?: { x: number; y: number; z: number; rx?: number; ry?: number; rz?: number };
  /** Joint values (deg / mm): the hint of a Cartesian target, or the joint program's row. */
  q?: number[];
}

export interface ParsedProgram {
  kind: 'cartesian' | 'joint';
  /** Cartesian programs with rx,ry,rz. */
  orientation: boolean;
  /** Cartesian programs with q1…qn hints. */
  hints: boolean;
  targets: ProgramTarget[];
}

export type ParseProgramResult = ({ ok: true } & ParsedProgram) | { ok: false; problems: InputProblem[]; truncated: boolean };

export const PROGRAM_MAX_TARGETS = 100_000;
export const PROGRAM_MAX_BYTES = 20 * 1024 * 1024;
const MAX_PROBLEMS = 100;
const NUMBER_RE = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;
const DECIMAL_COMMA_RE = /^[+-]?\d+,\d+$/;

/** Parse a program file for an arm of `jointCount` joints. Never throws for bad content. */
export function parseProgramCsv(text: string, fileName: string, jointCount: number): ParseProgramResult {
  const problems: InputProblem[] = [];
  let truncated = false;
  const problem = (p: Omit<InputProblem, 'file'>): boolean => {
    if (problems.length >= MAX_PROBLEMS) { truncated = true; return false; }
    problems.push({ file: fileName, ...p });
    return true;
  };
  const fail = (p: Omit<InputProblem, 'file'>): ParseProgramResult => {
    problem(p);
    return { ok: false, problems, truncated };
  };
  if (text.length > PROGRAM_MAX_BYTES) return fail({ message: `the file is larger than ${PROGRAM_MAX_BYTES / 1024 / 1024} MiB`, expected: `at most ${PROGRAM_MAX_TARGETS} targets` });
  if (text.includes('\u0000')) return fail({ message: 'the file contains NUL bytes: it is not a text CSV file', expected: 'a UTF-8 CSV text file' });
  if (!/\S/.test(text)) return fail({ line: 1, message: 'the file is empty', expected: 'a header line starting with "target"' });

  let records: { record: string[]; info: { lines: number } }[];
  try {
    records = parse(text, { bom: true, trim: true, skip_empty_lines: true, relax_column_count: true, info: true }) as unknown as { record: string[]; info: { lines: number } }[];
  } catch (e) {
    const err = e as { message: string; lines?: number };
    return fail({ line: err.lines, message: `not readable as CSV: ${err.message.replace(/^Invalid [^:]*: /, '')}`, expected: 'comma-separated values, text fields in double quotes' });
  }
  const qNames = Array.from({ length: jointCount }, (_, i) => `q${i + 1}`);
  const expectedHeader = `target,x,y,z[,rx,ry,rz][,${qNames.join(',')}] or target,${qNames.join(',')}`;
  const head = records[0];
  const headerLine = head.info.lines;
  const header = head.record.map((h) => h.toLowerCase());
  if (header.length === 1 && /;/.test(head.record[0])) {
    return fail({ line: headerLine, message: 'the header is separated by ";"', expected: `commas: ${expectedHeader}` });
  }
  const known = new Set(['target', 'x', 'y', 'z', 'rx', 'ry', 'rz', ...qNames]);
  const index = new Map<string, number>();
  header.forEach((h, c) => {
    if (!known.has(h)) {
      const extra = /^q\d+$/.test(h) ? ` (the arm has ${jointCount} joints)` : '';
      problem({ line: headerLine, column: head.record[c] || `column ${c + 1}`, message: `unknown column "${head.record[c]}"${extra}`, expected: expectedHeader });
    } else if (index.has(h)) problem({ line: headerLine, column: h, message: `column "${h}" appears twice`, expected: expectedHeader });
    else index.set(h, c);
  });
  if (!index.has('target')) problem({ line: headerLine, column: 'target', message: 'the header has no "target" column', expected: expectedHeader });
  const has = (...names: string[]) => names.filter((n) => index.has(n));
  const xyz = has('x', 'y', 'z'), rot = has('rx', 'ry', 'rz'), qs = has(...qNames);
  if (xyz.length > 0 && xyz.length < 3) problem({ line: headerLine, column: ['x', 'y', 'z'].find((n) => !index.has(n)), message: 'x, y and z must come together', expected: expectedHeader });
  if (rot.length > 0 && rot.length < 3) problem({ line: headerLine, column: ['rx', 'ry', 'rz'].find((n) => !index.has(n)), message: 'rx, ry and rz must come together', expected: expectedHeader });
  if (rot.length > 0 && xyz.length === 0) problem({ line: headerLine, column: 'rx', message: 'an orientation needs a position (x, y, z)', expected: expectedHeader });
  if (qs.length > 0 && qs.length < jointCount) problem({ line: headerLine, column: qNames.find((n) => !index.has(n)), message: `joint values need all ${jointCount} columns ${qNames.join(', ')}`, expected: expectedHeader });
  if (xyz.length === 0 && qs.length === 0) problem({ line: headerLine, message: 'the header has neither x,y,z nor joint columns', expected: expectedHeader });
  if (problems.length > 0) return { ok: false, problems, truncated };

  const kind = xyz.length === 3 ? 'cartesian' : 'joint';
  const orientation = rot.length === 3;
  const hints = kind === 'cartesian' && qs.length === jointCount;
  const targets: ProgramTarget[] = [];
  if (records.length - 1 > PROGRAM_MAX_TARGETS) return fail({ message: `the program has ${records.length - 1} targets`, expected: `at most ${PROGRAM_MAX_TARGETS}` });
  for (let k = 1; k < records.length; k++) {
    const { record, info } = records[k];
    const line = info.lines;
    if (record.length !== header.length) {
      if (!problem({ line, message: `${record.length} fields, the header has ${header.length}`, expected: header.join(',') })) break;
      continue;
    }
    const num = (col: string): number => {
      const raw = record[index.get(col)!];
      if (raw === '') { problem({ line, column: col, message: `${col} is empty`, expected: 'a number' }); return NaN; }
      if (!NUMBER_RE.test(raw)) {
        problem({ line, column: col, message: `"${raw}" is not a number${DECIMAL_COMMA_RE.test(raw) ? ' (decimal comma: write the decimal point as ".")' : ''}`, expected: col.startsWith('q') ? 'deg (revolute) or mm (prismatic)' : col.startsWith('r') ? 'deg' : 'mm' });
        return NaN;
      }
      return Number(raw);
    };
    const name = record[index.get('target')!];
    if (name === '') problem({ line, column: 'target', message: 'target name is empty', expected: 'a name for the target' });
    const t: ProgramTarget = { name, line };
    if (kind === 'cartesian') {
      t.pose = { x: num('x'), y: num('y'), z: num('z') };
      if (orientation) Object.assign(t.pose, { rx: num('rx'), ry: num('ry'), rz: num('rz') });
    }
    if (qs.length === jointCount) t.q = qNames.map(num);
    targets.push(t);
    if (truncated) break;
  }
  if (targets.length === 0 && problems.length === 0) problem({ line: headerLine + 1, message: 'the program has no targets', expected: 'one line per target after the header' });
  if (problems.length > 0) return { ok: false, problems, truncated };
  return { ok: true, kind, orientation, hints, targets };
}

export interface CompensatedRow {
  target: string;
  /** Joint values for the calibrated arm (deg / mm). */
  q: number[];
  /** Compensated target in the robot base frame (mm, deg). */
  x: number; y: number; z: number; rx: number; ry: number; rz: number;
  status: string;
  message: string;
}

/**
 * OUT.csv text, through the product's one CSV writer (src/lib/shared/csv.ts: text cells beginning with
 * = + - @ tab or carriage return are prefixed with ' so spreadsheets show them as text).
 */
export function compensatedCsv(rows: CompensatedRow[], jointCount: number): string {
  const header = ['target', ...Array.from({ length: jointCount }, (_, i) => `q${i + 1}`), 'x', 'y', 'z', 'rx', 'ry', 'rz', 'status', 'message'];
  const body = rows.map((r) => [r.target, ...r.q, r.x, r.y, r.z, r.rx, r.ry, r.rz, r.status, r.message]);
  return csvText([header, ...body], { eol: '\n' });
}

/** A program as CSV (the input contract), e.g. for the demo's invented programs. */
export function programCsv(targets: ProgramTarget[], jointCount: number): string {
  const first = targets[0];
  const cols = ['target'];
  if (first?.pose) cols.push('x', 'y', 'z', ...(first.pose.rx !== undefined ? ['rx', 'ry', 'rz'] : []));
  if (first?.q) cols.push(...Array.from({ length: jointCount }, (_, i) => `q${i + 1}`));
  const body = targets.map((t) => {
    const row: (string | number)[] = [t.name];
    if (t.pose) row.push(t.pose.x, t.pose.y, t.pose.z, ...(t.pose.rx !== undefined ? [t.pose.rx, t.pose.ry!, t.pose.rz!] : []));
    if (t.q) row.push(...t.q);
    return row;
  });
  return csvText([cols, ...body], { eol: '\n' });
}
