/**
 * Bulk writes: many rows in one statement with PostgreSQL's `unnest` over one array parameter per column
 * (`insert … select * from unnest($1::int[], $2::text[], …)`), instead of one bind parameter per cell.
 * The arrays travel as PostgreSQL array literals built here (elements double-quoted and escaped as the
 * array input syntax requires), so drizzle passes each as a single text parameter.
 */
import { sql, type SQL } from 'drizzle-orm';

/** Rows per statement: large enough that 100 000 rows take a handful of round trips. */
export const BULK_ROWS = 25_000;

const quote = (s: string) => '"' + s.replace(/[\\"]/g, (c) => '\\' + c) + '"';
const num = (v: number | null | undefined) => (v === null || v === undefined || !Number.isFinite(v) ? 'NULL' : String(v));

export const pgArray = {
  int: (xs: readonly number[]) => '{' + xs.map(num).join(',') + '}',
  float: (xs: readonly (number | null | undefined)[]) => '{' + xs.map(num).join(',') + '}',
  text: (xs: readonly (string | null | undefined)[]) => '{' + xs.map((s) => (s === null || s === undefined ? 'NULL' : quote(s))).join(',') + '}',
  bool: (xs: readonly boolean[]) => '{' + xs.map((b) => (b ? 't' : 'f')).join(',') + '}',
  /** One float8[] per row, carried as text[] of array literals (unnest would flatten a 2-D array). */
  floatRows: (xs: readonly (readonly number[])[]) => '{' + xs.map((r) => quote('{' + r.map(num).join(',') + '}')).join(',') + '}',
};

/** A typed array parameter for `unnest`, e.g. param(pgArray.int(ids), 'int[]'). */
export const arrayParam = (literal: string, type: string): SQL => sql`${literal}::${sql.raw(type)}`;
