/**
 * The fit report as pages and `GET /api/fits/{id}` carry it: the engine's report without its per-pose list
 * (stored apart, in fit_poses, and served page by page from `/api/fits/{id}/poses`), plus what the charts
 * need, computed once over every pose when the fit is stored: a decimated series of at most
 * CHART_POSE_LIMIT poses (flagged outliers and the largest residuals always in it, then an even sample), the error
 * histogram over all poses, and the suspects (flagged poses and the largest standardised residuals).
 * Pure: used by the worker on write, by the server for reports stored before the split, and typed for islands.
 */
import type { FitReport, PoseResidual } from '../engine/fit';
import { decimate } from './decimate';

/** Poses drawn by the fit page's charts. */
export const CHART_POSE_LIMIT = 1500;
/** Flagged poses listed in the summary (the paged endpoint has all of them). */
export const SUSPECT_LIMIT = 200;
export const HISTOGRAM_BINS = 20;

/** One pose in a chart: order in the file (1-based), and errors rounded to 1 µm (what screens show). */
export interface ChartPose {
  index: number;
  label: string;
  line: number;
  role: PoseResidual['role'];
  outlier: boolean;
  before: number;
  after: number;
  d: [number, number, number];
}

/**
 * The chart series as stored and served: one array per field (column-wise, so 1 500 poses stay near
 * 80 kB of JSON); `role` is one letter per pose: f fit, h hold-out, x excluded, o outlier (a flagged fit pose).
 */
export interface ChartSeries {
  index: number[];
  label: string[];
  line: number[];
  role: string;
  before: number[];
  after: number[];
  dx: number[];
  dy: number[];
  dz: number[];
}

const ROLE_LETTER = { fit: 'f', holdout: 'h', excluded: 'x' } as const;

/** The series back as one object per pose. */
export function chartPoses(c: ChartSeries): ChartPose[] {
  return c.index.map((index, k) => {
    const letter = c.role[k];
    return {
      index,
      label: c.label[k]!,
      line: c.line[k]!,
      role: letter === 'h' ? 'holdout' : letter === 'x' ? 'excluded' : 'fit',
      outlier: letter === 'o',
      before: c.before[k]!,
      after: c.after[k]!,
      d: [c.dx[k]!, c.dy[k]!, c.dz[k]!],
    };
  });
}

export interface HistogramBin {
  from: number;
  to: number;
  before: number;
  after: number;
}

export interface PoseSummary {
  count: number;
  fit: number;
  holdout: number;
  excluded: number;
  /** Chart series (≤ CHART_POSE_LIMIT poses) and the histogram over every non-excluded pose. */
  chart: ChartSeries;
  histogram: HistogramBin[];
  /** Flagged poses first, then the 8 largest standardised residuals of fit poses; full precision. */
  suspects: PoseResidual[];
}

export type FitReportSummary = Omit<FitReport, 'poses'> & { poseSummary: PoseSummary };

const r3 = (v: number) => Math.round(v * 1e3) / 1e3;

export function summarisePoses(poses: readonly PoseResidual[]): PoseSummary {
  const counts = { fit: 0, holdout: 0, excluded: 0 };
  for (const p of poses) counts[p.role]++;
  // Kept first: flagged outliers, and the largest errors before and after (a sixth of the budget each);
  // then half of what is left by the error after calibration, then an even sample.
  const sixth = Math.floor(CHART_POSE_LIMIT / 6);
  const largest = (f: (p: PoseResidual) => number) =>
    new Set(poses.map((p, i) => [f(p), i] as const).sort((a, b) => b[0] - a[0]).slice(0, sixth).map(([, i]) => i));
  const byAfter = largest((p) => p.errorAfter);
  const byBefore = largest((p) => p.errorBefore);
  const series = decimate(
    poses.map((p, i) => ({ p, i })),
    CHART_POSE_LIMIT,
    { keep: ({ p, i }) => (p.outlier && p.role === 'fit') || byAfter.has(i) || byBefore.has(i), score: ({ p }) => p.errorAfter },
  );
  const chart: ChartSeries = {
    index: series.map(({ i }) => i + 1),
    label: series.map(({ p }) => p.label),
    line: series.map(({ p }) => p.line),
    role: series.map(({ p }) => (p.role === 'fit' && p.outlier ? 'o' : ROLE_LETTER[p.role])).join(''),
    before: series.map(({ p }) => r3(p.errorBefore)),
    after: series.map(({ p }) => r3(p.errorAfter)),
    dx: series.map(({ p }) => r3(p.after[0])),
    dy: series.map(({ p }) => r3(p.after[1])),
    dz: series.map(({ p }) => r3(p.after[2])),
  };
  let top = 1e-6;
  for (const p of poses) if (p.role !== 'excluded') top = Math.max(top, p.errorBefore, p.errorAfter);
  const width = top / HISTOGRAM_BINS;
  const histogram = Array.from({ length: HISTOGRAM_BINS }, (_, k) => ({ from: k * width, to: (k + 1) * width, before: 0, after: 0 }));
  for (const p of poses) {
    if (p.role === 'excluded') continue;
    histogram[Math.min(HISTOGRAM_BINS - 1, Math.floor(p.errorBefore / width))]!.before++;
    histogram[Math.min(HISTOGRAM_BINS - 1, Math.floor(p.errorAfter / width))]!.after++;
  }
  const flagged = poses.filter((p) => p.outlier).slice(0, SUSPECT_LIMIT);
  const ranked = poses
    .filter((p) => p.role === 'fit' && p.standardised !== null && !p.outlier)
    .sort((a, b) => (b.standardised ?? 0) - (a.standardised ?? 0))
    .slice(0, 8);
  return { count: poses.length, ...counts, chart, histogram, suspects: [...flagged, ...ranked] };
}

/** The stored summary of an engine report (a report stored before the split is summarised on read). */
export function summariseReport(report: FitReport | FitReportSummary): FitReportSummary {
  if (!('poses' in report) || !Array.isArray((report as FitReport).poses)) return report as FitReportSummary;
  const { poses, ...rest } = report as FitReport;
  return { ...rest, poseSummary: summarisePoses(poses) };
}
