/**
 * The one CSV writer of Offsetry: every CSV the product writes (parameter exports, chart downloads, pose
 * plans, generated session files) goes through `csvText`, built on csv-stringify (the sibling of the
 * csv-parse reader we use). Safe for islands and server alike (the browser build of csv-stringify carries
 * its own Buffer shim, so nothing Node-only is pulled into an island).
 *
 * Rules:
 * - RFC 4180 quoting by csv-stringify (fields with a comma, quote or line break are quoted, quotes doubled);
 *   CRLF line ends by default.
 * - Numbers are written as numbers at full double precision (ECMA-262 Number::toString, the shortest
 *   decimal that reads back to the same double); -0 as 0; NaN / ±Infinity and null / undefined as an empty
 *   cell. A negative number stays a number.
 * - Text cells a spreadsheet would run as a formula are neutralised: when the text starts with `=`, `+`,
 *   `-`, `@`, a tab or a carriage return (or their full-width forms, after any leading spaces), a single
 *   quote is put in front of it (common practice: the OWASP "CSV injection" guidance). A text cell that is
 *   exactly a plain decimal number (e.g. "-1.5") is left alone: it is data, not a formula.
 */
import { stringify } from 'csv-stringify/browser/esm/sync';

export type CsvCell = string | number | boolean | null | undefined;

/** A plain decimal number, optionally signed, optionally with an exponent. */
const PLAIN_NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$/;
/** Characters that make a spreadsheet treat a cell as a formula (ASCII and full-width forms). */
const FORMULA_START = /^[ ]*[=+\-@\uff1d\uff0b\uff0d\uff20]|^[\t\r]/;

/** The text of one cell before quoting: numbers at full precision, risky text neutralised. */
export function csvCellText(v: CsvCell): string {
  if (v === null || v === undefined) return '';
  if (typeof v === 'number') return Number.isFinite(v) ? String(Object.is(v, -0) ? 0 : v) : '';
  if (typeof v === 'boolean') return v ? 'true' : 'false';
  if (PLAIN_NUMBER.test(v)) return v;
  return FORMULA_START.test(v) ? `'${v}` : v;
}

export interface CsvOptions {
  /** Line end; default CRLF (RFC 4180). */
  eol?: '\r\n' | '\n';
}

/** Rows (the first one usually the header) as CSV text ending with a line end. */
export function csvText(rows: readonly (readonly CsvCell[])[], options: CsvOptions = {}): string {
  const cells = rows.map((r) => r.map(csvCellText));
  if (cells.length === 0) return '';
  return stringify(cells, {
    record_delimiter: options.eol === '\n' ? 'unix' : 'windows',
    // Any line break (also a lone CR or LF inside a cell) and edge spaces are quoted.
    quoted_match: [/^\s|\s$/, /[\r\n]/],
  });
}
