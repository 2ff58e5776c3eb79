import type { ErrorStats } from '../../lib/engine/types';
import type { FitReportSummary } from '../../lib/shared/fit-summary';
import { mm } from './format';

/** Accuracy before and after: n, RMS, mean, max and 95th percentile of the fit (and hold-out) poses. */
export default function StatsTable({ report }: { report: FitReportSummary }) {
  const rows: [string, ErrorStats | undefined, ErrorStats | undefined][] = [
    ['Fit poses', report.statistics.fit.before, report.statistics.fit.after],
    ...(report.statistics.holdout ? ([['Hold-out poses', report.statistics.holdout.before, report.statistics.holdout.after]] as [string, ErrorStats, ErrorStats][]) : []),
  ];
  return (
    <table className="data-table no-sticky" data-fit-statistics>
      <thead>
        <tr>
          <th>Poses</th><th>Geometry</th><th className="num">n</th><th className="num">RMS (mm)</th><th className="num">Mean (mm)</th><th className="num">Max (mm)</th><th className="num">95th pct (mm)</th>
        </tr>
      </thead>
      <tbody>
        {rows.flatMap(([name, b, a]) => [
          <tr key={name + 'b'}>
            <td rowSpan={2}>{name}</td><td className="text-nominal">◌ nominal (before)</td>
            <td className="num">{b?.n}</td><td className="num">{mm(b?.rms)}</td><td className="num">{mm(b?.mean)}</td><td className="num">{mm(b?.max)}</td><td className="num">{mm(b?.p95)}</td>
          </tr>,
          <tr key={name + 'a'}>
            <td className="text-accent">● calibrated (after)</td>
            <td className="num">{a?.n}</td><td className="num" data-rms-after={name === 'Fit poses' ? a?.rms : undefined}>{mm(a?.rms)}</td><td className="num">{mm(a?.mean)}</td><td className="num">{mm(a?.max)}</td><td className="num">{mm(a?.p95)}</td>
          </tr>,
        ])}
        {report.statistics.crossValidation && (
          <tr>
            <td>{report.statistics.crossValidation.k}-fold cross-validation</td><td className="text-accent">● calibrated, each fold unseen</td>
            <td className="num">{report.statistics.crossValidation.folds.reduce((s, f) => s + f.n, 0)}</td><td className="num">{mm(report.statistics.crossValidation.rms)}</td>
            <td className="num">—</td><td className="num">{mm(Math.max(...report.statistics.crossValidation.folds.map((f) => f.max)))}</td><td className="num">—</td>
          </tr>
        )}
      </tbody>
    </table>
  );
}
