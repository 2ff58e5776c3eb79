import { chartPoses, type PoseSummary } from '../../lib/shared/fit-summary';
import { roleOf } from './chart-bits';

/**
 * One drawn pose as the residual charts take it. The pose's role travels as `poseRole`: recharts spreads data
 * fields onto SVG elements, and a `role` field would become an (invalid) ARIA role attribute on every mark.
 */
export interface ResidualRow {
  index: number;
  label: string;
  line: number;
  poseRole: string;
  before: number;
  after: number;
  dx: number;
  dy: number;
  dz: number;
}

/**
 * The chart series was decimated when the fit was stored (outliers, excluded poses and the largest
 * residuals always kept); the histogram counts every pose.
 */
export const residualRows = (summary: PoseSummary): ResidualRow[] =>
  chartPoses(summary.chart).map((p) => ({ index: p.index, label: p.label, line: p.line, poseRole: roleOf(p), before: p.before, after: p.after, dx: p.d[0], dy: p.d[1], dz: p.d[2] }));

/** What the per-pose and per-axis residual charts take. */
export interface ResidualChartProps {
  data: ResidualRow[];
  /** Poses in the fit; more than `data` holds when the series was decimated. */
  count: number;
  excludedCount: number;
  fitId: string;
  fileBase: string;
  /** The CSV of every pose (GET /api/fits/{id}/poses?format=csv). */
  csvHref: string;
}
