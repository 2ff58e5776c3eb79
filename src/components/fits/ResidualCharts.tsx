import { useMemo } from 'react';
import type { PoseSummary } from '../../lib/shared/fit-summary';
import AxisResiduals from './AxisResiduals';
import ErrorHistogram from './ErrorHistogram';
import ResidualBars from './ResidualBars';
import { residualRows } from './residual-rows';

/** The fit's residual charts: per pose (full width), then the error histogram and the residual per axis side by side. */
export default function ResidualCharts({ summary, fitId, fileBase }: { summary: PoseSummary; fitId: string; fileBase: string }) {
  const data = useMemo(() => residualRows(summary), [summary]);
  const excludedCount = summary.excluded;
  const csvHref = `/api/fits/${fitId}/poses?format=csv`;
  return (
    <>
      <ResidualBars data={data} count={summary.count} excludedCount={excludedCount} fitId={fitId} fileBase={fileBase} csvHref={csvHref} />
      <div className="mb-6 grid gap-6 lg:grid-cols-2">
        <ErrorHistogram histogram={summary.histogram} fileBase={fileBase} />
        <AxisResiduals data={data} count={summary.count} excludedCount={excludedCount} fitId={fitId} fileBase={fileBase} csvHref={csvHref} />
      </div>
    </>
  );
}
