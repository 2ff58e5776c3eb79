import { HIGH_CORRELATION } from '../../lib/engine/thresholds';
import type { FitReportSummary } from '../../lib/shared/fit-summary';
import { ACCENT, ATTENTION, RULE } from '../chart-colours';
import NumbersBehind from './NumbersBehind';

/**
 * The correlation matrix of the identified parameters as a heat map (teal positive, amber negative, opacity
 * |r|), the pairs the engine calls strongly correlated, and the matrix as numbers.
 */
export default function CorrelationMap({ report, fileBase }: { report: FitReportSummary; fileBase: string }) {
  const { keys, matrix } = report.correlation;
  const n = keys.length;
  const cell = Math.max(8, Math.min(22, Math.floor(640 / Math.max(n, 1))));
  const pad = 70;
  return (
    <section className="card mb-6">
      <h2 className="mb-1">Correlation of the identified parameters</h2>
      <p className="mb-2 text-sm text-ink-soft">Teal: positive, amber: negative; the stronger the colour, the closer |r| is to 1. Strongly correlated parameters are hard to tell apart with these poses.</p>
      {n === 0 ? <p>No identified parameters.</p> : (
        <div className="overflow-x-auto">
          <svg width={pad + n * cell + 4} height={pad + n * cell + 4} role="img" aria-label={`Correlation matrix of ${n} parameters`} data-chart="correlation">
            {keys.map((k, i) => (
              <g key={k}>
                <text x={pad - 4} y={pad + i * cell + cell * 0.7} fontSize={Math.min(11, cell - 1)} textAnchor="end">{k}</text>
                <text transform={`translate(${pad + i * cell + cell * 0.7},${pad - 4}) rotate(-60)`} fontSize={Math.min(11, cell - 1)}>{k}</text>
              </g>
            ))}
            {matrix.map((row, i) =>
              row.map((r, j) => (
                <rect key={`${i}-${j}`} x={pad + j * cell} y={pad + i * cell} width={cell - 1} height={cell - 1} fill={r >= 0 ? ACCENT : ATTENTION} fillOpacity={Math.min(1, Math.abs(r))} stroke={RULE} strokeWidth={0.5}>
                  <title>{`${keys[i]} · ${keys[j]}: r = ${r.toFixed(3)}`}</title>
                </rect>
              )),
            )}
          </svg>
        </div>
      )}
      {report.highCorrelations.length > 0 ? (
        <div className="notice notice-attention mt-3">
          <p className="font-semibold">▲ Pairs with |r| above {HIGH_CORRELATION}</p>
          <ul className="ml-5 list-disc">
            {report.highCorrelations.map((h) => (
              <li key={h.a + h.b}>{h.a} and {h.b} move together (r = {h.r.toFixed(3)}): the poses barely tell them apart.</li>
            ))}
          </ul>
        </div>
      ) : (
        <p className="mt-3">✓ No pair of identified parameters has |r| above {HIGH_CORRELATION}.</p>
      )}
      <NumbersBehind name={`${fileBase}-correlation.csv`} header={['parameter', ...keys]} rows={matrix.map((row, i) => [keys[i]!, ...row])}>
        <table className="data-table">
          <thead><tr><th>r</th>{keys.map((k) => <th key={k} className="num">{k}</th>)}</tr></thead>
          <tbody>{matrix.map((row, i) => <tr key={i}><td>{keys[i]}</td>{row.map((r, j) => <td key={j} className="num">{r.toFixed(3)}</td>)}</tr>)}</tbody>
        </table>
      </NumbersBehind>
    </section>
  );
}
