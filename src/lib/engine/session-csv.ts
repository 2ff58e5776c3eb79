/**
 * The measurement session file (CSV): header `pose,q1,…,qn,x,y,z`, optional `split` column, unknown
 * columns ignored with a warning. Streamed through csv-parse: the source is read chunk by chunk, decoded
 * by csv-parse, and never held as a whole; only the parsed poses are kept. Node-only (streams, Buffer).
 *
 * Line numbers are physical lines from 1 (header = 1), blank lines included.
 */
import { parse, CsvError } from 'csv-parse';
import { csvText, type CsvCell } from '../shared/csv';
import type { ArmGeometry, InputProblem, SessionPose } from './types';
import { checkedChunks, countNl } from './session-bytes';
import { StopReading, expectedHeader, readHeader, type Header } from './session-header';
import { readRow } from './session-rows';

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

  // Byte level: size, binary content, UTF-8 (session-bytes.ts).
  const { chunks, state } = checkedChunks(source, maxBytes, fatal);

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
      header = readHeader(rec, line, n, geometry.name, state.head, problem, fatal, warnings, file);
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
    for await (const s of chunks) {
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
    problems.push({ file, line: 1, message: state.sawText ? 'the file has no header' : 'the file is empty', expected: `a header line ${expectedHeader(n)} and one row per pose` });
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
  return { ok: true, poses, warnings, outsideLimits, hasSplit: header!.split >= 0, repeatGroups, bytes: state.bytes };
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
