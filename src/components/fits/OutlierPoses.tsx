import { useEffect, useMemo, useState } from 'react';
import type { FitReportSummary } from '../../lib/shared/fit-summary';
import { mm } from './format';

interface Props {
  report: FitReportSummary;
  /** The outlier threshold the fit used (standardised residual). */
  threshold: string;
  canRefit: boolean;
  busy: boolean;
  /** Fit again without the ticked poses, with the note for the reviewer (trimmed; empty when none). */
  onRefit: (exclude: string[], note: string) => void;
}

/**
 * The flagged poses first, then the largest standardised residuals (so a second suspect is one click away
 * too), each with a box to tick for a new fit without it.
 */
export default function OutlierPoses({ report, threshold, canRefit, busy, onRefit }: Props) {
  const [picked, setPicked] = useState<string[]>([]);
  const [why, setWhy] = useState('');
  // The boxes stay disabled until the island runs, so a tick is never lost to hydration.
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const outlierLabels = useMemo(() => {
    const ranked = report.poseSummary.suspects
      .filter((p) => p.role === 'fit' && p.standardised !== null)
      .sort((a, b) => (b.standardised ?? 0) - (a.standardised ?? 0))
      .slice(0, 8)
      .map((p) => p.label);
    return [...new Set([...report.outliers.slice(0, 200), ...ranked])];
  }, [report]);

  return (
    <section className="card min-w-0" data-outliers>
      <h2 className="mb-1">Outlier poses</h2>
      <p className="mb-2 text-sm text-ink-soft">
        {report.outliers.length
          ? `${report.outliers.length} pose(s) with a standardised residual above ${threshold}.`
          : `No pose has a standardised residual above ${threshold}.`}{' '}
        Tick poses to fit again without them; this fit is kept.
      </p>
      <table className="data-table">
        <thead><tr><th>Exclude</th><th>Pose</th><th className="num">After (mm)</th><th className="num">Standardised</th><th>Flag</th></tr></thead>
        <tbody>
          {outlierLabels.map((label) => {
            const p = report.poseSummary.suspects.find((x) => x.label === label || `line:${x.line}` === label);
            return (
              <tr key={label}>
                <td>
                  <input
                    type="checkbox"
                    className="h-5 w-5 accent-accent"
                    aria-label={`Exclude ${label}`}
                    checked={picked.includes(label)}
                    disabled={!canRefit || !hydrated}
                    onChange={(e) => setPicked((cur) => (e.target.checked ? [...cur, label] : cur.filter((x) => x !== label)))}
                  />
                </td>
                <td>{label}</td>
                <td className="num">{mm(p?.errorAfter)}</td>
                <td className="num">{p?.standardised?.toFixed(2) ?? '—'}</td>
                <td>{p?.outlier ? <span className="text-attention">▲ outlier</span> : '—'}</td>
              </tr>
            );
          })}
        </tbody>
      </table>
      {canRefit && (
        <>
          <label className="field mt-3">
            <span>Why exclude them (shown to the reviewer)</span>
            <input className="input" name="exclusion-note" value={why} onChange={(e) => setWhy(e.target.value)} maxLength={4000} />
          </label>
          <button type="button" className="btn mt-3" disabled={busy || picked.length === 0} onClick={() => onRefit(picked, why.trim())}>
            Fit again without these ({picked.length})
          </button>
          <p className="mt-1 text-sm text-ink-soft">The new fit keeps every other setting of this one (parameter groups, hold-out, cross-validation, robust loss, seed).</p>
        </>
      )}
    </section>
  );
}
