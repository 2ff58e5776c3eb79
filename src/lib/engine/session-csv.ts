/**
 * The measurement session file (CSV): header `pose,q1,…,qn,x,y,z`, optional `split` column, unknown
 * columns ignored with a warning. Streamed through csv-parse: the source is read chunk by chunk, decoded
 * by csv-parse, and never held as a whole; only the parsed poses are kept. Node-only (streams, Buffer).
 *
 * Line numbers are physical lines from 1 (header = 1), blank lines included.
 */
import { isUtf8 } from 'node:buffer';
import { parse, CsvError } from 'csv-parse';
import { csvText, type CsvCell } from '../shared/csv';
import type { ArmGeometry, InputProblem, SessionPose } from './types';

export interface ParseSessionOptions {
  fileName: string;
  geometry: ArmGeometry;
  /** Accept joint readings outside the model's limits (they are still listed in `outsideLimits`). Default false. */
  allowOutsideLimits?: boolean;
  /** Stop after this many problems and set `truncated`. Default 100. */
  maxProblems?: number;
  /** Refuse files larger than this, reading no further than the limit. Default 50 MiB. */
  maxBytes?: number;
}

export interface ParsedSession {
  poses: SessionPose[];
  warnings: InputProblem[];
  outsideLimits: InputProblem[];
  hasSplit: boolean;
  /** Number of pose labels visited more than once (ISO 9283 repeat groups). */
  repeatGroups: number;
  bytes: number;
  sha256?: never;
}

export type ParseSessionResult =
  | ({ ok: true } & ParsedSession)
  | { ok: false; problems: InputProblem[]; warnings: InputProblem[]; truncated: boolean };

export const DEFAULT_MAX_PROBLEMS = 100;
export const DEFAULT_MAX_BYTES = 50 * 1024 * 1024;
/** Joint readings of two visits of one label that differ by less than this (deg or mm) are the same pose. */
export const REPEAT_TOLERANCE = 1e-6;

/** Strict decimal number: optional sign, digits with optional point, optional exponent. */
const NUMBER_RE = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;
const DECIMAL_COMMA_RE = /^[+-]?\d+,\d+$/;

class StopReading extends Error {}

/** File signatures of common binary formats people upload by mistake. */
function binarySignature(b: Uint8Array): string | undefined {
  const starts = (...sig: number[]) => sig.every((v, k) => b[k] === v);
  if (starts(0x89, 0x50, 0x4e, 0x47)) return 'a PNG image';
  if (starts(0x50, 0x4b, 0x03, 0x04) || starts(0x50, 0x4b, 0x05, 0x06)) return 'a ZIP archive (or an Excel .xlsx workbook)';
  if (starts(0x25, 0x50, 0x44, 0x46)) return 'a PDF document';
  if (starts(0x1f, 0x8b)) return 'a gzip archive';
  if (starts(0xff, 0xd8, 0xff)) return 'a JPEG image';
  if (starts(0xd0, 0xcf, 0x11, 0xe0)) return 'an old Office document (e.g. Excel .xls)';
  if (starts(0xff, 0xfe) || starts(0xfe, 0xff)) return 'UTF-16 text (save it as UTF-8)';
  return undefined;
}

async function* chunksOf(source: string | AsyncIterable<Uint8Array | string>): AsyncGenerator<Uint8Array | string> {
  if (typeof source === 'string') {
    // Slices of the caller's string: no second copy of the whole text.
    const step = 1 << 16;
    for (let k = 0; k < source.length; k += step) yield source.slice(k, k + step);
    return;
  }
  yield* source;
}

/** Length of the UTF-8 sequence a lead byte starts (1 for ASCII or a stray continuation byte). */
function utf8Length(lead: number): number {
  return lead >= 0xf0 ? 4 : lead >= 0xe0 ? 3 : lead >= 0xc0 ? 2 : 1;
}

/** Bytes at the end of `c` (from `from`) that start a multi-byte sequence not yet complete. */
function incompleteTail(c: Uint8Array, from: number): number {
  for (let k = 1; k <= 3 && c.length - k >= from; k++) {
    const b = c[c.length - k];
    if ((b & 0xc0) === 0x80) continue; // continuation byte: look further back
    return b >= 0xc0 && utf8Length(b) > k ? k : 0;
  }
  return 0;
}

/**
 * Parse a session CSV against an arm geometry. Never throws for bad content: every problem (up to
 * `maxProblems`) comes back with file, line, column and what was expected.
 */
export async function parseSessionCsv(
  source: string | AsyncIterable<Uint8Array | string>,
  options: ParseSessionOptions,
): Promise<ParseSessionResult> {
  const file = options.fileName;
  const geometry = options.geometry;
  const n = geometry.joints.length;
  const maxProblems = options.maxProblems ?? DEFAULT_MAX_PROBLEMS;
  const maxBytes = options.maxBytes ?? DEFAULT_MAX_BYTES;
  const allowOutside = options.allowOutsideLimits ?? false;

  const problems: InputProblem[] = [];
  const warnings: InputProblem[] = [];
  const outsideLimits: InputProblem[] = [];
  let truncated = false;
  const problem = (p: Omit<InputProblem, 'file'>) => {
    if (problems.length >= maxProblems) {
      truncated = true;
      throw new StopReading();
    }
    problems.push({ file, ...p });
  };
  const fatal = (p: Omit<InputProblem, 'file'>) => {
    problem(p);
    throw new StopReading();
  };

  // ---- byte level: size, binary content, UTF-8 ---------------------------------------------------
  // Bytes go to csv-parse as they come (it decodes each field itself); here they are only checked:
  // size, signatures of binary formats, NUL bytes, and UTF-8 validity (buffer.isUtf8, native).
  let bytes = 0;
  let sawText = false; // any non-whitespace character
  let head = ''; // the start of the file (first two lines), for delimiter sniffing
  let firstBytes = true;
  let carry: Uint8Array | undefined; // an incomplete UTF-8 sequence at the end of the previous chunk

  const HEAD_BYTES = 4096;
  const takeHead = (c: Uint8Array | string) => {
    if (head.length < HEAD_BYTES) head += typeof c === 'string' ? c.slice(0, HEAD_BYTES) : new TextDecoder().decode(c.subarray(0, HEAD_BYTES));
    if (!sawText) {
      if (typeof c === 'string') sawText = /\S/.test(c);
      else for (let k = 0; k < c.length && !sawText; k++) sawText = c[k] > 32;
    }
  };

  // Physical lines seen so far at the byte level, so binary content can be located.
  let newlines = 0;
  const countNl = (c: Uint8Array | string, end: number) => {
    let count = 0;
    if (typeof c === 'string') {
      for (let k = c.indexOf('\n'); k >= 0 && k < end; k = c.indexOf('\n', k + 1)) count++;
    } else {
      for (let k = 0; k < end; k++) if (c[k] === 10) count++;
    }
    return count;
  };
  const tooBig = () =>
    fatal({ message: `the file is larger than the limit of ${formatBytes(maxBytes)} (reading stopped at ${formatBytes(bytes)})`, expected: 'a smaller session file' });
  const nul = (c: Uint8Array | string, at: number) =>
    fatal({ line: newlines + countNl(c, at) + 1, message: 'not a CSV text file: it contains NUL bytes (binary data)', expected: 'a UTF-8 CSV text file' });
  const notUtf8 = (c: Uint8Array) => {
    // Locate the first undecodable byte for the message (slow path, only on failure).
    const loose = new TextDecoder('utf-8').decode(c);
    const at = loose.indexOf('\ufffd');
    fatal({
      line: newlines + countNl(loose, at < 0 ? loose.length : at) + 1,
      message: 'not a CSV text file: the bytes are not valid UTF-8',
      expected: 'a UTF-8 CSV text file (save as "CSV UTF-8")',
    });
  };
  const checkUtf8 = (c: Uint8Array) => {
    let from = 0;
    if (carry) {
      // finish the sequence split across chunks: at most 3 more bytes
      const need = utf8Length(carry[0]) - carry.length;
      const joined = new Uint8Array(carry.length + Math.min(need, c.length));
      joined.set(carry);
      joined.set(c.subarray(0, need), carry.length);
      if (joined.length < utf8Length(carry[0])) { carry = joined; return; }
      if (!isUtf8(joined)) notUtf8(joined);
      from = need;
      carry = undefined;
    }
    const tail = incompleteTail(c, from);
    if (!isUtf8(c.subarray(from, c.length - tail))) notUtf8(c.subarray(from));
    if (tail) carry = c.slice(c.length - tail);
  };

  async function* checked(): AsyncGenerator<Uint8Array | string> {
    for await (const chunk of chunksOf(source)) {
      if (typeof chunk === 'string') {
        bytes += Buffer.byteLength(chunk);
        if (bytes > maxBytes) tooBig();
        const z = chunk.indexOf('\0');
        if (z >= 0) nul(chunk, z);
        if (!chunk) continue;
        const s = firstBytes && chunk.charCodeAt(0) === 0xfeff ? chunk.slice(1) : chunk;
        firstBytes = false;
        newlines += countNl(s, s.length);
        takeHead(s);
        yield s;
        continue;
      }
      if (chunk.byteLength === 0) continue;
      bytes += chunk.byteLength;
      if (bytes > maxBytes) tooBig();
      if (firstBytes) {
        const kind = binarySignature(chunk);
        if (kind) fatal({ line: 1, message: `not a CSV text file: it looks like ${kind}`, expected: 'a UTF-8 CSV text file' });
      }
      const z = chunk.indexOf(0);
      if (z >= 0) nul(chunk, z);
      checkUtf8(chunk);
      // a UTF-8 byte-order mark is accepted and dropped
      const c = firstBytes && chunk[0] === 0xef && chunk[1] === 0xbb && chunk[2] === 0xbf ? chunk.subarray(3) : chunk;
      firstBytes = false;
      newlines += countNl(c, c.length);
      takeHead(c);
      yield c;
    }
    if (carry) fatal({ line: newlines + 1, message: 'not a CSV text file: the bytes are not valid UTF-8 (truncated character at the end)', expected: 'a UTF-8 CSV text file' });
  }

  // ---- record level ---------------------------------------------------------------------------
  // Records are handled synchronously in 'data' events (markedly cheaper than async iteration at
  // 100 000 rows). Empty lines are kept as records so that physical lines can be counted here:
  // a record spans one line plus the line breaks inside its (quoted) fields.
  const parser = parse({ relax_column_count: true, skip_empty_lines: false });
  let lineNo = 0;

  let header: Header | undefined;
  const poses: SessionPose[] = [];
  const visits = new Map<string, { q: number[]; line: number; count: number }>();
  let headerKey = '';

  const onRecord = (rec: string[]) => {
    const line = ++lineNo;
    for (let k = 0; k < rec.length; k++) if (rec[k].includes('\n')) lineNo += countNl(rec[k], rec[k].length);
    // Empty lines, and lines of spaces only, are skipped (but counted).
    if (rec.length === 1 && (rec[0] === '' || rec[0].trim() === '')) return;
    if (!header) {
      header = readHeader(rec, line, n, geometry.name, head, problem, fatal, warnings, file);
      headerKey = rec.map((c) => c.trim().toLowerCase()).join('\u0001');
      return;
    }
    if (
      rec.length === header.count &&
      rec[0].trim().toLowerCase() === header.names[0] &&
      rec.map((c) => c.trim().toLowerCase()).join('\u0001') === headerKey
    ) {
      problem({ line, message: 'the header is repeated as a data row', expected: 'one header line at the top (remove this line)' });
      return;
    }
    const pose = readRow(rec, line, header, geometry, problem, outsideLimits, file);
    if (!pose) return;
    const prev = visits.get(pose.label);
    if (prev) {
      let same = true;
      for (let k = 0; k < n; k++) if (Math.abs(prev.q[k] - pose.q[k]) > REPEAT_TOLERANCE) same = false;
      if (!same) {
        problem({
          line,
          column: 'pose',
          message: `duplicate pose label "${pose.label}" is not a repeat: joints differ from line ${prev.line}`,
          expected: 'a new label for a new configuration, or the same joint values for a repeat visit',
        });
        return;
      }
      prev.count++;
    } else visits.set(pose.label, { q: pose.q, line, count: 1 });
    poses.push(pose);
  };

  let failure: unknown;
  const stop = (e: unknown) => {
    if (failure === undefined) failure = e;
    if (!parser.destroyed) parser.destroy();
  };
  const finished = new Promise<void>((resolve) => {
    parser.on('data', (rec: string[]) => {
      if (failure !== undefined) return;
      try {
        onRecord(rec);
      } catch (e) {
        stop(e);
        resolve();
      }
    });
    parser.on('error', (e) => {
      stop(e);
      resolve();
    });
    parser.on('end', () => resolve());
    parser.on('close', () => resolve());
  });
  try {
    for await (const s of checked()) {
      if (failure !== undefined) break; // leaving the loop closes the source
      if (!parser.write(s)) await new Promise<void>((r) => { parser.once('drain', () => r()); parser.once('close', () => r()); });
    }
    if (failure === undefined) parser.end();
  } catch (e) {
    stop(e);
  }
  await finished;

  if (failure instanceof CsvError) {
    const line = (failure as unknown as { lines?: number }).lines;
    try {
      problem({ line, message: `CSV syntax: ${csvMessage(failure)}`, expected: 'quotes closed on the same field, "" for a quote inside a quoted field' });
    } catch (e) {
      if (!(e instanceof StopReading)) throw e;
    }
  } else if (failure !== undefined && !(failure instanceof StopReading)) {
    throw failure;
  }

  if (problems.length === 0 && !header) {
    problems.push({ file, line: 1, message: sawText ? 'the file has no header' : 'the file is empty', expected: `a header line ${expectedHeader(n)} and one row per pose` });
  } else if (problems.length === 0 && poses.length === 0) {
    problems.push({ file, line: 2, message: 'the file has a header but no data rows', expected: 'one row per measured pose after the header' });
  }
  if (!allowOutside && outsideLimits.length > 0) {
    if (problems.length >= maxProblems) truncated = true;
    for (const p of outsideLimits) {
      if (problems.length >= maxProblems) { truncated = true; break; }
      problems.push({ ...p, message: `${p.message}; use the outside-limits override to accept it` });
    }
  }
  if (problems.length > 0) {
    problems.sort((a, b) => (a.line ?? 0) - (b.line ?? 0));
    return { ok: false, problems, warnings, truncated };
  }
  let repeatGroups = 0;
  for (const v of visits.values()) if (v.count > 1) repeatGroups++;
  return { ok: true, poses, warnings, outsideLimits, hasSplit: header!.split >= 0, repeatGroups, bytes };
}

function formatBytes(b: number): string {
  if (b >= 1024 * 1024) return `${+(b / (1024 * 1024)).toFixed(1)} MiB`;
  if (b >= 1024) return `${+(b / 1024).toFixed(1)} KiB`;
  return `${b} bytes`;
}

function csvMessage(e: CsvError): string {
  switch (e.code) {
    case 'CSV_QUOTE_NOT_CLOSED':
      return 'a quoted field is never closed';
    case 'CSV_INVALID_CLOSING_QUOTE':
    case 'CSV_NON_TRIMABLE_CHAR_AFTER_CLOSING_QUOTE':
      return 'unexpected character after a closing quote';
    case 'INVALID_OPENING_QUOTE':
      return 'a quote inside an unquoted field';
    default:
      return e.message;
  }
}

function expectedHeader(n: number): string {
  const qs = n <= 3 ? Array.from({ length: n }, (_, k) => `q${k + 1}`).join(',') : `q1,…,q${n}`;
  return `pose,${qs},x,y,z`;
}

interface Header {
  pose: number;
  q: number[]; // column index of q1..qn
  x: number;
  y: number;
  z: number;
  split: number; // −1 when absent
  names: string[];
  count: number;
}

type ProblemFn = (p: Omit<InputProblem, 'file'>) => void;

function readHeader(
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
  if (missing.length) {
    problem({
      line,
      column: missing[0],
      message: `missing joint column${missing.length > 1 ? 's' : ''} ${missing.join(', ')}: the model "${modelName}" has ${n} joint${n > 1 ? 's' : ''}`,
      expected,
    });
  }
  if (extra.length) {
    problem({
      line,
      column: extra[0],
      message: `extra joint column${extra.length > 1 ? 's' : ''} ${extra.join(', ')}: the model "${modelName}" has ${n} joint${n > 1 ? 's' : ''}`,
      expected,
    });
  }
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

/** A numeric cell, or NaN after reporting what is wrong with it. */
function cellNumber(cell: string, line: number, column: string, unit: string, problem: ProblemFn): number {
  const raw = cell.trim();
  if (NUMBER_RE.test(raw)) return Number(raw);
  let what: string;
  if (raw === '') what = 'empty cell';
  else if (/^[+-]?nan$/i.test(raw)) what = 'NaN is not a measured value';
  else if (/^[+-]?(inf|infinity)$/i.test(raw)) what = 'Infinity is not a measured value';
  else if (DECIMAL_COMMA_RE.test(raw)) what = `"${raw}" uses a decimal comma`;
  else what = `"${raw.length > 40 ? raw.slice(0, 40) + '…' : raw}" is not a number`;
  problem({ line, column, message: what, expected: `a decimal number in ${unit} (e.g. 12.5)` });
  return NaN;
}

function readRow(
  rec: string[],
  line: number,
  h: Header,
  geometry: ArmGeometry,
  problem: ProblemFn,
  outsideLimits: InputProblem[],
  file: string,
): SessionPose | undefined {
  if (rec.length !== h.count) {
    const decimalComma = rec.length > h.count && rec.some((c, k) => k > 0 && /^\d+$/.test(c.trim()));
    const delim = rec.length === 1 && /[;\t]/.test(rec[0]);
    problem({
      line,
      message: `the row has ${rec.length} field${rec.length === 1 ? '' : 's'} but the header has ${h.count}${
        decimalComma ? ' — numbers written with a decimal comma ("1,5") split into two fields' : ''
      }${delim ? ' — the row is separated by ";" or tabs, not commas' : ''}`,
      expected: `${h.count} comma-separated fields${decimalComma ? ', decimal point (1.5)' : ''}`,
    });
    return undefined;
  }
  let bad = false;
  const label = rec[h.pose].trim();
  if (label === '') {
    problem({ line, column: 'pose', message: 'empty pose label', expected: 'a label such as P1' });
    bad = true;
  }
  const q = new Array<number>(h.q.length);
  for (let j = 0; j < h.q.length; j++) {
    const joint = geometry.joints[j];
    const unit = joint.type === 'prismatic' ? 'mm' : 'deg';
    const v = cellNumber(rec[h.q[j]], line, `q${j + 1}`, unit, problem);
    if (v !== v) bad = true; // NaN: reported
    q[j] = v;
    if (Number.isFinite(v) && ((joint.min !== undefined && v < joint.min) || (joint.max !== undefined && v > joint.max))) {
      outsideLimits.push({
        file,
        line,
        column: `q${j + 1}`,
        message: `joint ${joint.name} reading ${v} ${unit} is outside the model's limits`,
        expected: `${joint.min ?? '−∞'} to ${joint.max ?? '∞'} ${unit}`,
      });
    }
  }
  const x = cellNumber(rec[h.x], line, 'x', 'mm', problem);
  const y = cellNumber(rec[h.y], line, 'y', 'mm', problem);
  const z = cellNumber(rec[h.z], line, 'z', 'mm', problem);
  if (x !== x || y !== y || z !== z) bad = true;
  let split: SessionPose['split'];
  if (h.split >= 0) {
    const s = rec[h.split].trim().toLowerCase();
    if (s === 'fit' || s === 'validate') split = s;
    else if (s !== '') {
      problem({ line, column: 'split', message: `unknown split value "${rec[h.split].trim()}"`, expected: '"fit", "validate" or empty' });
      bad = true;
    }
  }
  if (bad) return undefined;
  const pose: SessionPose = { label, line, q, x, y, z };
  if (split) pose.split = split;
  return pose;
}

// ---- writing ------------------------------------------------------------------------------------

/**
 * Write poses in the session format (full double precision via Number→string, which round-trips).
 * The split column is written when any pose has one.
 */
export function sessionToCsv(poses: SessionPose[], jointCount: number): string {
  const withSplit = poses.some((p) => p.split !== undefined);
  const qs = Array.from({ length: jointCount }, (_, k) => `q${k + 1}`);
  const rows: CsvCell[][] = [['pose', ...qs, 'x', 'y', 'z', ...(withSplit ? ['split'] : [])]];
  for (const p of poses) {
    if (p.q.length !== jointCount) throw new Error(`pose ${p.label}: ${p.q.length} joint values, expected ${jointCount}`);
    const cells: CsvCell[] = [p.label, ...p.q, p.x, p.y, p.z];
    if (withSplit) cells.push(p.split ?? '');
    rows.push(cells);
  }
  return csvText(rows, { eol: '\n' });
}

/**
 * A pose plan as CSV: header pose,q1..qn, labels P1, P2, … (zero-padded). Joint values are rounded to
 * `decimals` (default 3: 0.001 deg / 0.001 mm, finer than a technician can jog to) — a plan is a target
 * to drive to, not a measurement.
 */
export function planToCsv(q: number[][], geometry: ArmGeometry, decimals = 3): string {
  const n = geometry.joints.length;
  const width = String(q.length).length;
  const rows: CsvCell[][] = [['pose', ...Array.from({ length: n }, (_, k) => `q${k + 1}`)]];
  q.forEach((row, i) => {
    if (row.length !== n) throw new Error(`plan row ${i + 1}: ${row.length} joint values, expected ${n}`);
    rows.push([`P${String(i + 1).padStart(width, '0')}`, ...row.map((v) => Number(v.toFixed(decimals)) || 0)]);
  });
  return csvText(rows, { eol: '\n' });
}
