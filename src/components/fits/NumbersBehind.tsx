import { useId, useState } from 'react';
import { useFocusWhen } from '../../lib/shared/focus';
import { downloadCsv, mm } from './format';

interface Props {
  /** File name of the CSV download; also names the region the table opens in. */
  name: string;
  header: string[];
  rows: (string | number | null)[][];
  /** A table of its own instead of the plain one built from header and rows. */
  children?: React.ReactNode;
  /** Download from this address instead of building the CSV from header and rows. */
  csvHref?: string;
}

/**
 * A chart's text alternative: "Show the numbers" opens the table behind it (which then takes focus), and
 * "Download CSV" saves the same numbers.
 */
export default function NumbersBehind({ name, header, rows, children, csvHref }: Props) {
  const [shown, setShown] = useState(false);
  // The button names the table it opens, and the table takes focus when shown.
  const id = useId();
  const tableRef = useFocusWhen<HTMLDivElement>(shown);
  return (
    <div className="mt-2">
      <div className="flex flex-wrap gap-2">
        <button type="button" className="btn btn-quiet" aria-expanded={shown} aria-controls={id} onClick={() => setShown(!shown)}>
          {shown ? 'Hide the numbers' : 'Show the numbers'}
        </button>
        {csvHref ? (
          <a className="btn btn-quiet" href={csvHref} download={name}>Download CSV</a>
        ) : (
          <button type="button" className="btn btn-quiet" onClick={() => downloadCsv(name, header, rows)}>
            Download CSV
          </button>
        )}
      </div>
      {shown && (
        <div id={id} ref={tableRef} className="mt-2 max-h-96 overflow-auto" role="region" aria-label={`Numbers behind the chart (${name})`}>
          {children ?? (
            <table className="data-table">
              <thead>
                <tr>{header.map((h) => <th key={h} className={h === header[0] ? '' : 'num'}>{h}</th>)}</tr>
              </thead>
              <tbody>
                {rows.map((r, i) => (
                  <tr key={i}>{r.map((c, k) => <td key={k} className={k === 0 ? '' : 'num'}>{c === null ? '—' : typeof c === 'number' ? mm(c) : c}</td>)}</tr>
                ))}
              </tbody>
            </table>
          )}
        </div>
      )}
    </div>
  );
}
