/**
 * Shared plumbing of the command line: reading the two input files with located problems, writing
 * outputs only after success (temp file + rename), and the error type that maps to an exit code.
 */
import { createReadStream, existsSync, promises as fs, statSync } from 'node:fs';
import { basename, dirname, resolve } from 'node:path';
import { parseArgs, type ParseArgsConfig } from 'node:util';
import { parseGeometry } from '../lib/engine/geometry';
import { parseSessionCsv, type ParsedSession } from '../lib/engine/session-csv';
import { EngineInputError, formatProblem, type ArmGeometry, type InputProblem } from '../lib/engine/types';

export const EXIT_OK = 0;
export const EXIT_INPUT = 1;
export const EXIT_USAGE = 2;
export const EXIT_INTERNAL = 3;

/** Bad input or bad usage: printed as is, no stack trace. */
export class CliError extends Error {
  constructor(
    message: string,
    readonly exitCode: number = EXIT_INPUT,
  ) {
    super(message);
  }
}

export interface Io {
  out: (line: string) => void;
  err: (line: string) => void;
}

export const MAX_PRINTED_PROBLEMS = 20;

export function problemsMessage(headline: string, problems: InputProblem[], truncated = false): string {
  const shown = problems.slice(0, MAX_PRINTED_PROBLEMS).map((p) => `  ${formatProblem(p)}`);
  const more = problems.length - shown.length;
  const tail = more > 0 || truncated ? [`  … and ${more > 0 ? more : 'more'} further problem${more === 1 ? '' : 's'}`] : [];
  return [headline, ...shown, ...tail].join('\n');
}

/** node:util parseArgs with usage errors turned into CliError. */
export function parseOptions<T extends NonNullable<ParseArgsConfig['options']>>(args: string[], options: T, usage: string) {
  try {
    return parseArgs({ args, options, strict: true, allowPositionals: false }).values;
  } catch (e) {
    throw new CliError(`${(e as Error).message.replace(/^TypeError \[\w+\]: /, '')}\n\n${usage}`, EXIT_USAGE);
  }
}

export function required(value: unknown, flag: string, usage: string): string {
  if (typeof value !== 'string' || value === '') throw new CliError(`missing ${flag}\n\n${usage}`, EXIT_USAGE);
  return value;
}

export function numberOption(value: unknown, flag: string, check: (v: number) => boolean, expected: string): number | undefined {
  if (value === undefined) return undefined;
  const v = Number(value);
  if (typeof value !== 'string' || value.trim() === '' || !Number.isFinite(v) || !check(v)) {
    throw new CliError(`${flag}: "${String(value)}" is not valid (expected ${expected})`, EXIT_USAGE);
  }
  return v;
}

function readableFile(path: string, what: string): string {
  const full = resolve(path);
  if (!existsSync(full)) throw new CliError(`${path}: ${what} not found`);
  if (!statSync(full).isFile()) throw new CliError(`${path}: ${what} is not a file`);
  return full;
}

export async function readGeometryFile(path: string): Promise<ArmGeometry> {
  const full = readableFile(path, 'geometry file');
  const text = await fs.readFile(full, 'utf8');
  try {
    return parseGeometry(text, path);
  } catch (e) {
    if (e instanceof EngineInputError) throw new CliError(problemsMessage(`cannot read the geometry file ${path}:`, e.problems));
    throw e;
  }
}

export async function readSessionFile(path: string, geometry: ArmGeometry, allowOutsideLimits: boolean, io: Io): Promise<ParsedSession> {
  const full = readableFile(path, 'session file');
  const r = await parseSessionCsv(createReadStream(full), { fileName: path, geometry, allowOutsideLimits });
  for (const w of r.warnings) io.err(`warning: ${formatProblem(w)}`);
  if (!r.ok) {
    const hint = r.problems.some((p) => /outside the model's limits/.test(p.message)) ? '\n(use --allow-outside-limits to accept joint readings outside the limits)' : '';
    throw new CliError(problemsMessage(`cannot read the session file ${path}:`, r.problems, r.truncated) + hint);
  }
  for (const w of r.outsideLimits) io.err(`warning: ${formatProblem(w)} — accepted (--allow-outside-limits)`);
  return r;
}

/** Fails early (before any work) when an output cannot be written where asked. */
export function checkOutputPath(path: string, flag: string): string {
  const full = resolve(path);
  const dir = dirname(full);
  if (!existsSync(dir) || !statSync(dir).isDirectory()) throw new CliError(`${flag} ${path}: the folder ${dirname(path)} does not exist`);
  if (existsSync(full) && statSync(full).isDirectory()) throw new CliError(`${flag} ${path}: is a folder, expected a file name`);
  return full;
}

/**
 * Writes every output to a temp file beside its target, then renames them all: nothing appears under
 * the target names unless all the content was produced and written.
 */
export async function writeOutputs(files: { path: string; content: string }[]): Promise<void> {
  const temps: { tmp: string; path: string }[] = [];
  try {
    for (const f of files) {
      const tmp = resolve(dirname(f.path), `.${basename(f.path)}.${process.pid}.${Date.now().toString(36)}.tmp`);
      temps.push({ tmp, path: f.path });
      await fs.writeFile(tmp, f.content, { encoding: 'utf8', flag: 'wx' });
    }
    for (const t of temps) await fs.rename(t.tmp, t.path);
  } catch (e) {
    await Promise.all(temps.map((t) => fs.rm(t.tmp, { force: true })));
    throw new CliError(`cannot write the outputs: ${(e as Error).message}`);
  }
}

export function mm(v: number | null | undefined, digits = 3): string {
  return v === null || v === undefined || !Number.isFinite(v) ? '—' : `${v.toFixed(digits)} mm`;
}

export function ms(v: number): string {
  return v < 10 ? `${v.toFixed(2)} ms` : v < 1000 ? `${v.toFixed(1)} ms` : `${(v / 1000).toFixed(2)} s`;
}

export function table(rows: string[][]): string[] {
  const widths = rows[0].map((_, c) => Math.max(...rows.map((r) => (r[c] ?? '').length)));
  return rows.map((r) => r.map((cell, c) => (c === 0 ? cell.padEnd(widths[c]) : cell.padStart(widths[c]))).join('   ').trimEnd());
}
