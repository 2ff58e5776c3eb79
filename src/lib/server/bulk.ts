/**
 * Bulk work: COPY … FROM STDIN where a table takes many rows at once (copyInto: 100 000 rows in one
 * statement, no bind parameter per cell), and array parameters for `= any($1::int[])` lookups.
 */
import { once } from 'node:events';
import { finished } from 'node:stream/promises';
import { sql, type SQL } from 'drizzle-orm';
import type postgres from 'postgres';

const num = (v: number | null | undefined) => (v === null || v === undefined || !Number.isFinite(v) ? 'NULL' : String(v));

/** PostgreSQL array literals of numbers (non-finite → NULL), passed as one text parameter. */
export const pgArray = {
  int: (xs: readonly number[]) => '{' + xs.map(num).join(',') + '}',
};

/** A typed array parameter, e.g. arrayParam(pgArray.int(ids), "int[]") for `= any(…)`. */
export const arrayParam = (literal: string, type: string): SQL => sql`${literal}::${sql.raw(type)}`;

/**
 * Fields of PostgreSQL's COPY text format (one row a line, fields split by tabs, `\N` for null): text with
 * backslash, tab, newline and carriage return escaped; numbers in JavaScript's shortest round-trip spelling,
 * non-finite ones as null (as the array literals above).
 */
export const copyField = {
  text: (v: string | null | undefined) =>
    v === null || v === undefined ? '\\N' : v.replace(/[\\\t\n\r]/g, (c) => (c === '\\' ? '\\\\' : c === '\t' ? '\\t' : c === '\n' ? '\\n' : '\\r')),
  // String(-0) is '0': spelled out so a negative zero comes back as written.
  num: (v: number | null | undefined) => (v === null || v === undefined || !Number.isFinite(v) ? '\\N' : Object.is(v, -0) ? '-0' : String(v)),
  bool: (b: boolean) => (b ? 't' : 'f'),
  /** A float8[] as an array literal (no characters COPY escapes). */
  floats: (xs: readonly number[]) => '{' + xs.map(num).join(',') + '}',
};

/** postgres.js under a Drizzle database or transaction (COPY is not part of Drizzle's query builder). */
function rawClient(database: { $client: postgres.Sql } | object): postgres.Sql {
  if ('$client' in database) return database.$client;
  return (database as { session: { client: postgres.Sql } }).session.client;
}

/**
 * `count` rows into `table` with COPY … FROM STDIN, in the caller's transaction when given one: one
 * statement for any number of rows, `line(i)` the i-th row as COPY text fields joined by tabs (no newline).
 */
export async function copyInto(database: { $client: postgres.Sql } | object, table: string, columns: readonly string[], count: number, line: (i: number) => string): Promise<void> {
  if (count === 0) return;
  const client = rawClient(database);
  const writable = await client`copy ${client(table)} (${client(columns as string[])}) from stdin`.writable();
  const done = finished(writable);
  const CHUNK = 2_000;
  for (let k = 0; k < count; k += CHUNK) {
    let text = '';
    for (let i = k; i < Math.min(count, k + CHUNK); i++) text += line(i) + '\n';
    if (!writable.write(text)) await once(writable, 'drain');
  }
  writable.end();
  await done;
}
