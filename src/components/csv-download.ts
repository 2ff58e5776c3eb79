import { csvText, type CsvCell } from '../lib/shared/csv';

/**
 * Save rows as a CSV file in the browser — the numbers behind a chart, one click away. Written by the
 * product's one CSV writer (src/lib/shared/csv.ts): RFC 4180 quoting, CRLF, numbers at full precision,
 * text that a spreadsheet would run as a formula neutralised.
 */
export function downloadCsv(fileName: string, header: string[], rows: CsvCell[][]) {
  const text = csvText([header, ...rows]);
  const url = URL.createObjectURL(new Blob([text], { type: 'text/csv' }));
  const a = document.createElement('a');
  a.href = url;
  a.download = fileName;
  document.body.appendChild(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 1000);
}
