import { useEffect, useId, useMemo, useRef, useState } from 'react';
import { Bar, BarChart, CartesianGrid, Cell, Legend, ResponsiveContainer, Scatter, ScatterChart, Symbols, Tooltip, XAxis, YAxis } from 'recharts';
import type { ParameterReport } from '../../lib/engine/fit';
import { chartPoses, type FitReportSummary as EngineReport, type PoseSummary } from '../../lib/shared/fit-summary';
import type { ErrorStats } from '../../lib/engine/types';
import type { Verdicts } from '../../lib/engine/plausibility';
import { api, type ApiError } from '../../lib/shared/api-client';
import { focusResult, openResult, useFocusWhen } from '../../lib/shared/focus';
import FitWarnings from './FitWarnings';
import { crossMarker, PoseTip, roleOf } from './chart-bits';
import FitSettingsList from './FitSettingsList';
import { fitLabel } from '../../lib/shared/fit-label';
import { OverrideField, VerdictList } from './Verdicts';
import { byUnit, downloadCsv, FIT_STATE_LABEL, GROUP_LABEL, GROUP_ORDER, mm, REVIEW_STATE_LABEL, sci, when } from './format';

/** The fit as GET /api/fits/{id} returns it (dates as ISO strings). */
export interface FitView {
  id: string;
  sessionId: string;
  unitSerial: string;
  sessionMeasuredOn: string;
  sessionFileName: string;
  parentFitId: string | null;
  state: 'queued' | 'running' | 'fitted' | 'failed';
  reviewState: 'awaiting_review' | 'approved' | 'returned' | null;
  settings: Record<string, unknown>;
  progress: { iteration: number; rmsMm: number; cost: number } | null;
  error: string | null;
  engineVersion: string | null;
  attempts: number;
  durationMs: number | null;
  createdAt: string;
  startedAt: string | null;
  finishedAt: string | null;
  createdByName: string | null;
  submittedByName: string | null;
  submittedAt: string | null;
  decidedByName: string | null;
  decidedAt: string | null;
  decisionComment: string | null;
  inputChecksums: { sessionFile: string; nominalGeometry: string } | null;
  report: EngineReport | null;
  parameterSet: { id: string; version: number; state: string } | null;
  verdicts?: Verdicts | null;
  submitNote?: string | null;
  overrideNote?: string | null;
  overrideByName?: string | null;
  exclusionNote?: string | null;
}

interface Props {
  initial: FitView;
  canSubmit: boolean;
  canRefit: boolean;
  /** Shown after the residual charts: the page passes the 3-D view island here (Astro slot). */
  children?: React.ReactNode;
  /** May write the override an implausible fit needs (engineers, admins). */
  canOverride?: boolean;
}

const ACCENT = '#0f6e6e';
const NOMINAL = '#8a94a6';
const ATTENTION = '#b7791f';

function Numbers({ name, header, rows, children, csvHref }: { name: string; header: string[]; rows: (string | number | null)[][]; children?: React.ReactNode; csvHref?: string }) {
  const [shown, setShown] = useState(false);
  // The chart's text alternative: the button names the table it opens, and the table takes focus when shown.
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

interface PoseRowView {
  order: number;
  label: string;
  line: number;
  role: string;
  errorBefore: number;
  errorAfter: number;
  after: [number, number, number];
  standardised: number | null;
}

const PAGE_SIZE = 100;

/** Every pose's numbers, a page at a time from /api/fits/{id}/poses (the page itself carries only a sample). */
function PosePages({ fitId, total, axes }: { fitId: string; total: number; axes?: boolean }) {
  const [page, setPage] = useState(1);
  const [order, setOrder] = useState<'file' | 'largest'>('file');
  const [rows, setRows] = useState<PoseRowView[] | null>(null);
  const [failed, setFailed] = useState<string | null>(null);
  const pages = Math.max(1, Math.ceil(total / PAGE_SIZE));
  useEffect(() => {
    let stop = false;
    setFailed(null);
    api<{ poses: PoseRowView[] }>(`/api/fits/${fitId}/poses?page=${page}&pageSize=${PAGE_SIZE}&order=${order}`).then((res) => {
      if (stop) return;
      if (res.data) setRows(res.data.poses);
      else setFailed(res.error?.error ?? 'The poses could not be loaded.');
    });
    return () => {
      stop = true;
    };
  }, [fitId, page, order]);
  return (
    <div data-pose-pages>
      <div className="mb-2 flex flex-wrap items-center gap-2 text-sm">
        <label className="flex items-center gap-2">
          <span>Order</span>
          <select className="input" value={order} onChange={(e) => { setOrder(e.target.value as 'file' | 'largest'); setPage(1); }}>
            <option value="file">as in the file</option>
            <option value="largest">largest residual after first</option>
          </select>
        </label>
        <button type="button" className="btn btn-quiet" disabled={page <= 1} onClick={() => setPage(page - 1)}>← Previous</button>
        <span role="status">Page {page} of {pages} ({total} poses)</span>
        <button type="button" className="btn btn-quiet" disabled={page >= pages} onClick={() => setPage(page + 1)}>Next →</button>
      </div>
      {failed && <p className="notice notice-error" role="alert">✕ {failed}</p>}
      {rows && (
        <table className="data-table">
          <thead>
            {axes ? (
              <tr><th>Pose</th><th className="num">dx (mm)</th><th className="num">dy (mm)</th><th className="num">dz (mm)</th></tr>
            ) : (
              <tr><th>Pose</th><th className="num">Order</th><th>Role</th><th className="num">Before (mm)</th><th className="num">After (mm)</th><th className="num">dx (mm)</th><th className="num">dy (mm)</th><th className="num">dz (mm)</th><th className="num">Standardised</th></tr>
            )}
          </thead>
          <tbody>
            {rows.map((p) =>
              axes ? (
                <tr key={p.order}><td>{p.label}</td><td className="num">{mm(p.after[0])}</td><td className="num">{mm(p.after[1])}</td><td className="num">{mm(p.after[2])}</td></tr>
              ) : (
                <tr key={p.order}>
                  <td>{p.label}</td><td className="num">{p.order}</td><td>{p.role}</td><td className="num">{mm(p.errorBefore)}</td><td className="num">{mm(p.errorAfter)}</td>
                  <td className="num">{mm(p.after[0])}</td><td className="num">{mm(p.after[1])}</td><td className="num">{mm(p.after[2])}</td><td className="num">{p.standardised === null ? '—' : p.standardised.toFixed(2)}</td>
                </tr>
              ),
            )}
          </tbody>
        </table>
      )}
    </div>
  );
}

function StatsTable({ report }: { report: EngineReport }) {
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

function ResidualCharts({ summary, fitId, fileBase }: { summary: PoseSummary; fitId: string; fileBase: string }) {
  // The pose's role travels as `poseRole`: recharts spreads data fields onto SVG elements, and a `role`
  // field would become an (invalid) ARIA role attribute on every mark.
  // The chart series was decimated when the fit was stored (outliers, excluded poses and the largest
  // residuals always kept); the histogram counts every pose.
  const data = useMemo(() => chartPoses(summary.chart).map((p) => ({ index: p.index, label: p.label, line: p.line, poseRole: roleOf(p), before: p.before, after: p.after, dx: p.d[0], dy: p.d[1], dz: p.d[2] })), [summary]);
  const excludedCount = summary.excluded;
  const histogram = useMemo(() => summary.histogram.map((h) => ({ ...h, bin: `${mm(h.from)}–${mm(h.to)}` })), [summary]);
  const sampled = data.length < summary.count;
  const csvHref = `/api/fits/${fitId}/poses?format=csv`;
  return (
    <>
      <section className="card mb-6">
        <h2 className="mb-1">Residual per pose</h2>
        <p className="mb-2 text-sm text-ink-soft">3-D distance between measured and predicted point, with the nominal geometry (grey) and the calibrated one (teal).{excludedCount ? ` Excluded poses (${excludedCount}, not used by the fit) are drawn as hollow, dashed bars.` : ''}{sampled ? ` ${data.length} of the ${summary.count} poses drawn: every outlier and excluded pose, the largest residuals, and an even sample of the rest; the numbers hold all ${summary.count}.` : ''}</p>
        <div className="h-72" data-chart="residuals">
          <ResponsiveContainer width="100%" height="100%">
            <BarChart data={data} margin={{ top: 8, right: 16, bottom: 24, left: 16 }}>
              <CartesianGrid strokeDasharray="3 3" stroke="#dde1e8" />
              <XAxis dataKey="index" label={{ value: 'Pose (order in the file)', position: 'insideBottom', offset: -12 }} />
              <YAxis label={{ value: 'Residual (mm)', angle: -90, position: 'insideLeft' }} />
              <Tooltip
                content={({ active, payload }) => {
                  const d = payload?.[0]?.payload as (typeof data)[number] | undefined;
                  return d ? <PoseTip active={active} heading={`Pose ${d.label} (line ${d.line})`} role={d.poseRole} rows={[{ name: 'Before (nominal)', value: `${mm(d.before)} mm` }, { name: 'After (calibrated)', value: `${mm(d.after)} mm` }]} /> : null;
                }}
              />
              <Legend verticalAlign="top" />
              <Bar dataKey="before" name="Before (nominal)" fill={NOMINAL} isAnimationActive={false}>
                {data.map((d) => <Cell key={d.index} fill={d.poseRole === 'excluded' ? '#ffffff' : NOMINAL} stroke={d.poseRole === 'excluded' ? NOMINAL : undefined} strokeDasharray={d.poseRole === 'excluded' ? '3 2' : undefined} />)}
              </Bar>
              <Bar dataKey="after" name="After (calibrated)" fill={ACCENT} isAnimationActive={false}>
                {data.map((d) => <Cell key={d.index} fill={d.poseRole === 'excluded' ? '#ffffff' : ACCENT} stroke={d.poseRole === 'excluded' ? ACCENT : undefined} strokeDasharray={d.poseRole === 'excluded' ? '3 2' : undefined} />)}
              </Bar>
            </BarChart>
          </ResponsiveContainer>
        </div>
        <Numbers name={`${fileBase}-residuals.csv`} header={[]} rows={[]} csvHref={csvHref}>
          <PosePages fitId={fitId} total={summary.count} />
        </Numbers>
      </section>

      <div className="mb-6 grid gap-6 lg:grid-cols-2">
        <section className="card">
          <h2 className="mb-1">Distribution of 3-D errors</h2>
          <p className="mb-2 text-sm text-ink-soft">Number of poses (fit and hold-out) per error band, before and after.</p>
          <div className="h-64" data-chart="histogram">
            <ResponsiveContainer width="100%" height="100%">
              <BarChart data={histogram} margin={{ top: 8, right: 16, bottom: 24, left: 8 }}>
                <CartesianGrid strokeDasharray="3 3" stroke="#dde1e8" />
                <XAxis dataKey="to" tickFormatter={(v) => mm(Number(v))} label={{ value: 'Error up to (mm)', position: 'insideBottom', offset: -12 }} />
                <YAxis allowDecimals={false} label={{ value: 'Poses', angle: -90, position: 'insideLeft' }} />
                <Tooltip
                  content={({ active, payload }) => {
                    const h = payload?.[0]?.payload as (typeof histogram)[number] | undefined;
                    return h ? <PoseTip active={active} heading={`3-D error ${h.bin} mm`} role={undefined} rows={[{ name: 'Before (nominal)', value: `${h.before} poses` }, { name: 'After (calibrated)', value: `${h.after} poses` }, { name: 'Counted', value: 'fit and held-out poses; excluded ones are left out' }]} /> : null;
                  }}
                />
                <Legend verticalAlign="top" />
                <Bar dataKey="before" name="Before (nominal)" fill={NOMINAL} isAnimationActive={false} />
                <Bar dataKey="after" name="After (calibrated)" fill={ACCENT} isAnimationActive={false} />
              </BarChart>
            </ResponsiveContainer>
          </div>
          <Numbers name={`${fileBase}-histogram.csv`} header={['band_mm', 'before_poses', 'after_poses']} rows={histogram.map((h) => [h.bin, h.before, h.after])}>
            <table className="data-table">
              <thead><tr><th>Band (mm)</th><th className="num">Before (poses)</th><th className="num">After (poses)</th></tr></thead>
              <tbody>{histogram.map((h) => <tr key={h.bin}><td>{h.bin}</td><td className="num">{h.before}</td><td className="num">{h.after}</td></tr>)}</tbody>
            </table>
          </Numbers>
        </section>

        <section className="card">
          <h2 className="mb-1">Residual per axis, after calibration</h2>
          <p className="mb-2 text-sm text-ink-soft">Measured minus predicted in the tracker frame: x (circle), y (square), z (triangle){excludedCount ? '; excluded poses as ✕ in grey' : ''}.</p>
          <div className="h-64" data-chart="axes">
            <ResponsiveContainer width="100%" height="100%">
              <ScatterChart margin={{ top: 8, right: 16, bottom: 24, left: 16 }}>
                <CartesianGrid strokeDasharray="3 3" stroke="#dde1e8" />
                <XAxis type="number" dataKey="index" name="Pose" label={{ value: 'Pose (order in the file)', position: 'insideBottom', offset: -12 }} />
                <YAxis type="number" dataKey="v" name="Residual" label={{ value: 'Residual (mm)', angle: -90, position: 'insideLeft' }} />
                <Tooltip
                  content={({ active, payload }) => {
                    const d = payload?.[0]?.payload as { label: string; line: number; poseRole: string; axis: string; v: number } | undefined;
                    return d ? <PoseTip active={active} heading={`Pose ${d.label} (line ${d.line})`} role={d.poseRole} rows={[{ name: `Residual ${d.axis}`, value: `${mm(d.v)} mm` }]} /> : null;
                  }}
                />
                <Legend verticalAlign="top" />
                {(
                  [
                    ['dx', 'x', 'dx', ACCENT, 'circle'],
                    ['dy', 'y', 'dy', NOMINAL, 'square'],
                    ['dz', 'z', 'dz', ATTENTION, 'triangle'],
                  ] as const
                ).map(([name, axis, key, colour, symbol]) => (
                  <Scatter
                    key={name}
                    name={name}
                    data={data.map((d) => ({ index: d.index, v: d[key], label: d.label, line: d.line, poseRole: d.poseRole, axis }))}
                    fill={colour}
                    legendType={symbol}
                    shape={(props: unknown) => {
                      const { cx = 0, cy = 0, payload } = props as { cx?: number; cy?: number; payload?: { poseRole: string } };
                      return payload?.poseRole === 'excluded' ? crossMarker(cx, cy, NOMINAL, 4) : <Symbols cx={cx} cy={cy} type={symbol} size={48} fill={colour} />;
                    }}
                    isAnimationActive={false}
                  />
                ))}
              </ScatterChart>
            </ResponsiveContainer>
          </div>
          <Numbers name={`${fileBase}-residuals.csv`} header={[]} rows={[]} csvHref={csvHref}>
            <PosePages fitId={fitId} total={summary.count} axes />
          </Numbers>
        </section>
      </div>
    </>
  );
}

function ParameterTable({ parameters, fileBase }: { parameters: ParameterReport[]; fileBase: string }) {
  const ordered = GROUP_ORDER.flatMap((g) => parameters.filter((p) => p.group === g));
  return (
    <section className="card mb-6">
      <h2 className="mb-2">Parameters</h2>
      <div className="overflow-x-auto">
        <table className="data-table" data-parameter-table>
          <thead>
            <tr><th>Parameter</th><th>Unit</th><th className="num">Nominal</th><th className="num">Calibrated</th><th className="num">Change</th><th className="num">Standard error</th><th>Status</th></tr>
          </thead>
          <tbody>
            {GROUP_ORDER.map((g) => {
              const rows = ordered.filter((p) => p.group === g);
              if (!rows.length) return null;
              return [
                <tr key={g}><th colSpan={7} className="bg-paper">{GROUP_LABEL[g]}</th></tr>,
                ...rows.map((p) => (
                  <tr key={p.key} data-parameter={p.key}>
                    <td>{p.joint ? `${p.joint} ${p.name}` : p.key}</td>
                    <td>{p.unit}</td>
                    <td className="num">{byUnit(p.unit, p.nominal)}</td>
                    <td className="num">{byUnit(p.unit, p.calibrated)}</td>
                    <td className="num">{byUnit(p.unit, p.change)}</td>
                    <td className="num">{byUnit(p.unit, p.standardError)}</td>
                    <td>{p.status === 'identified' ? <span className="text-accent">● identified</span> : <span className="text-ink-soft">◌ fixed at nominal — {p.reason}</span>}</td>
                  </tr>
                )),
              ];
            })}
          </tbody>
        </table>
      </div>
      <div className="mt-2">
        <button type="button" className="btn btn-quiet" onClick={() => downloadCsv(`${fileBase}-parameters.csv`, ['key', 'group', 'unit', 'nominal', 'calibrated', 'change', 'standard_error', 'status', 'reason'], ordered.map((p) => [p.key, p.group, p.unit, p.nominal, p.calibrated, p.change, p.standardError, p.status, p.reason ?? '']))}>
          Download CSV
        </button>
      </div>
    </section>
  );
}

function CorrelationMap({ report, fileBase }: { report: EngineReport; fileBase: string }) {
  const { keys, matrix } = report.correlation;
  const n = keys.length;
  const cell = Math.max(8, Math.min(22, Math.floor(640 / Math.max(n, 1))));
  const pad = 70;
  const colour = (r: number) => {
    const a = Math.min(1, Math.abs(r));
    return r >= 0 ? `rgba(15,110,110,${a})` : `rgba(183,121,31,${a})`;
  };
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
                <rect key={`${i}-${j}`} x={pad + j * cell} y={pad + i * cell} width={cell - 1} height={cell - 1} fill={colour(r)} stroke="#dde1e8" strokeWidth={0.5}>
                  <title>{`${keys[i]} · ${keys[j]}: r = ${r.toFixed(3)}`}</title>
                </rect>
              )),
            )}
          </svg>
        </div>
      )}
      {report.highCorrelations.length > 0 ? (
        <div className="notice notice-attention mt-3">
          <p className="font-semibold">▲ Pairs with |r| above 0.95</p>
          <ul className="ml-5 list-disc">
            {report.highCorrelations.map((h) => (
              <li key={h.a + h.b}>{h.a} and {h.b} move together (r = {h.r.toFixed(3)}): the poses barely tell them apart.</li>
            ))}
          </ul>
        </div>
      ) : (
        <p className="mt-3">✓ No pair of identified parameters has |r| above 0.95.</p>
      )}
      <Numbers name={`${fileBase}-correlation.csv`} header={['parameter', ...keys]} rows={matrix.map((row, i) => [keys[i]!, ...row])}>
        <table className="data-table">
          <thead><tr><th>r</th>{keys.map((k) => <th key={k} className="num">{k}</th>)}</tr></thead>
          <tbody>{matrix.map((row, i) => <tr key={i}><td>{keys[i]}</td>{row.map((r, j) => <td key={j} className="num">{r.toFixed(3)}</td>)}</tr>)}</tbody>
        </table>
      </Numbers>
    </section>
  );
}

function Observability({ report }: { report: EngineReport }) {
  const o = report.observability;
  return (
    <section className="card min-w-0">
      <h2 className="mb-2">Observability</h2>
      <table className="data-table" data-observability>
        <tbody>
          <tr><td>Identified parameters</td><td className="num">{o.rank} of {o.parameterCount} candidates</td></tr>
          <tr><td>Condition number of the scaled Jacobian</td><td className="num">{sci(o.conditionNumber)}</td></tr>
          <tr><td>O1 (Borm &amp; Menq; larger is better)</td><td className="num">{sci(o.O1)}</td></tr>
          <tr><td>O3 (smallest singular value; larger is better)</td><td className="num">{sci(o.O3)}</td></tr>
          <tr><td>O4 (noise amplification, Nahvi &amp; Hollerbach; larger is better)</td><td className="num">{sci(o.O4)}</td></tr>
          <tr><td>Residual standard deviation σ (mm)</td><td className="num">{mm(report.residualSigmaMm)}</td></tr>
          <tr><td>Solver</td><td className="num whitespace-normal break-words" data-solver>{report.iterations.length} iterations, {report.converged ? 'converged' : 'not converged'} ({report.stopReason})</td></tr>
        </tbody>
      </table>
    </section>
  );
}

export default function FitReport({ initial, canSubmit, canRefit, canOverride = false, children }: Props) {
  const [fit, setFit] = useState<FitView>(initial);
  const [picked, setPicked] = useState<string[]>([]);
  const [comment, setComment] = useState('');
  const [override, setOverride] = useState('');
  const [why, setWhy] = useState('');
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<ApiError | null>(null);
  const [message, setMessage] = useState<string | null>(null);
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);

  const waiting = fit.state === 'queued' || fit.state === 'running';
  // When the fit finishes while the page is open, focus moves to its result (or its error).
  const wasWaiting = useRef(waiting);
  const resultRef = useRef<HTMLHeadingElement>(null);
  const failedRef = useRef<HTMLDivElement>(null);
  useEffect(() => {
    if (wasWaiting.current && !waiting) focusResult(fit.state === 'failed' ? failedRef.current : resultRef.current);
    wasWaiting.current = waiting;
  }, [waiting, fit.state]);
  const messageRef = useFocusWhen<HTMLParagraphElement>(message);
  const errorRef = useFocusWhen<HTMLDivElement>(error);
  useEffect(() => {
    if (!waiting) return;
    let stop = false;
    const tick = async () => {
      const res = await api<{ fit: FitView }>(`/api/fits/${fit.id}`);
      if (stop) return;
      if (res.data) setFit(res.data.fit);
      timer = setTimeout(tick, 1000);
    };
    let timer = setTimeout(tick, 700);
    return () => {
      stop = true;
      clearTimeout(timer);
    };
  }, [waiting, fit.id]);

  const report = fit.report;
  const fileBase = `fit-${fit.unitSerial}-${fit.id.slice(0, 8)}`;
  const outlierLabels = useMemo(() => {
    if (!report) return [];
    // Outliers first, then the largest standardised residuals, so a second suspect is one click away too.
    const ranked = report.poseSummary.suspects
      .filter((p) => p.role === 'fit' && p.standardised !== null)
      .sort((a, b) => (b.standardised ?? 0) - (a.standardised ?? 0))
      .slice(0, 8)
      .map((p) => p.label);
    return [...new Set([...report.outliers.slice(0, 200), ...ranked])];
  }, [report]);

  const implausible = fit.verdicts?.level === 'implausible';

  async function refit() {
    setBusy(true);
    setError(null);
    // Only the exclusions (and why): the server keeps every other setting of this fit.
    const res = await api<{ id: string }>(`/api/fits/${fit.id}/refit`, { method: 'POST', json: { exclude: picked, ...(why.trim() ? { note: why.trim() } : {}) } });
    if (res.error) {
      setError(res.error);
      setBusy(false);
      return;
    }
    openResult(`/fits/${res.data.id}`);
  }

  async function submit() {
    setBusy(true);
    setError(null);
    const res = await api(`/api/fits/${fit.id}/submit`, { method: 'POST', json: { ...(comment.trim() ? { comment: comment.trim() } : {}), ...(implausible ? { override: override.trim() } : {}) } });
    setBusy(false);
    if (res.error) return setError(res.error);
    setMessage('Submitted for review. The engineers have been notified by e-mail.');
    const again = await api<{ fit: FitView }>(`/api/fits/${fit.id}`);
    if (again.data) setFit(again.data.fit);
  }

  return (
    <div data-fit-report data-fit-state={fit.state} data-review-state={fit.reviewState ?? ''}>
      {fit.verdicts && <VerdictList verdicts={fit.verdicts} />}
      <section className="card mb-6">
        <div className="flex flex-wrap items-center gap-3">
          <span className="badge" data-state-badge>{FIT_STATE_LABEL[fit.state]}</span>
          {fit.reviewState && <span className="badge">{REVIEW_STATE_LABEL[fit.reviewState]}</span>}
          {fit.parameterSet && <a className="badge no-underline" href={`/units/${encodeURIComponent(fit.unitSerial)}`}>● parameter set v{fit.parameterSet.version} ({fit.parameterSet.state})</a>}
        </div>
        {waiting && (
          <p className="mt-3" role="status" aria-live="polite" data-fit-progress>
            {fit.state === 'queued'
              ? 'Waiting for a worker…'
              : fit.progress
                ? `Iteration ${fit.progress.iteration}, RMS ${mm(fit.progress.rmsMm)} mm`
                : 'Starting…'}
          </p>
        )}
        {fit.state === 'failed' && (
          <div ref={failedRef} className="notice notice-error mt-3" role="alert">
            <p className="font-semibold">✕ The fit failed</p>
            <p>{fit.error}</p>
          </div>
        )}
        {fit.decisionComment && (
          <p className="mt-3">
            <strong>{fit.reviewState === 'returned' ? 'Returned' : 'Decision'} by {fit.decidedByName} ({when(fit.decidedAt)}):</strong> {fit.decisionComment}
          </p>
        )}
        <dl className="mt-3 grid gap-x-6 gap-y-1 text-sm sm:grid-cols-2 lg:grid-cols-4">
          <div><dt className="text-ink-soft">Run by</dt><dd>{fit.createdByName ?? '—'} · {fitLabel(fit.createdAt, fit.id)}</dd></div>
          <div><dt className="text-ink-soft">Engine</dt><dd>{fit.engineVersion ? `v${fit.engineVersion}` : '—'}{fit.durationMs !== null ? ` · ${fit.durationMs} ms` : ''}{fit.attempts > 1 ? ` · attempt ${fit.attempts}` : ''}</dd></div>
          <div><dt className="text-ink-soft">Session file SHA-256</dt><dd className="truncate" title={fit.inputChecksums?.sessionFile}>{fit.inputChecksums?.sessionFile.slice(0, 16) ?? '—'}…</dd></div>
          <div><dt className="text-ink-soft">Nominal geometry SHA-256</dt><dd className="truncate" title={fit.inputChecksums?.nominalGeometry}>{fit.inputChecksums?.nominalGeometry.slice(0, 16) ?? '—'}…</dd></div>
          <div className="sm:col-span-2 lg:col-span-4"><dt className="text-ink-soft">Settings</dt><dd><FitSettingsList settings={fit.settings} /></dd></div>
        </dl>
      </section>

      {report && (
        <>
          <section className="card mb-6">
            <h2 className="mb-2" ref={resultRef}>Accuracy before and after</h2>
            <StatsTable report={report} />
            {report.registration.registered && <p className="mt-2 text-sm text-ink-soft">The tracker frame was registered to the robot base first (rigid fit, RMS {mm(report.registration.rmsMm)} mm); “before” uses that registered nominal.</p>}
          </section>
          <FitWarnings report={report} />

          <ResidualCharts summary={report.poseSummary} fitId={fit.id} fileBase={fileBase} />
          {children}
          <ParameterTable parameters={report.parameters} fileBase={fileBase} />
          <CorrelationMap report={report} fileBase={fileBase} />

          <div className="mb-6 grid gap-6 lg:grid-cols-2">
            <Observability report={report} />
            <section className="card min-w-0" data-outliers>
              <h2 className="mb-1">Outlier poses</h2>
              <p className="mb-2 text-sm text-ink-soft">
                {report.outliers.length
                  ? `${report.outliers.length} pose(s) with a standardised residual above ${String(fit.settings.outlierThreshold ?? 3)}.`
                  : `No pose has a standardised residual above ${String(fit.settings.outlierThreshold ?? 3)}.`}{' '}
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
                  <button type="button" className="btn mt-3" disabled={busy || picked.length === 0} onClick={refit}>
                    Fit again without these ({picked.length})
                  </button>
                  <p className="mt-1 text-sm text-ink-soft">The new fit keeps every other setting of this one (parameter groups, hold-out, cross-validation, robust loss, seed).</p>
                </>
              )}
            </section>
          </div>
        </>
      )}

      {fit.state === 'fitted' && fit.reviewState === null && canSubmit && (
        <section className="card mb-6" data-submit-review>
          <h2 className="mb-2">Submit for review</h2>
          <label className="field mb-3">
            <span>Note for the reviewer (optional)</span>
            <textarea className="input" name="submit-note" value={comment} onChange={(e) => setComment(e.target.value)} maxLength={4000} />
          </label>
          {implausible && <OverrideField value={override} onChange={setOverride} allowed={canOverride} />}
          <button type="button" className="btn" disabled={busy || (implausible && (!canOverride || override.trim().length < 20))} onClick={submit}>
            {implausible ? 'Submit with override' : 'Submit for review'}
          </button>
        </section>
      )}
      {message && <p ref={messageRef} className="notice mb-4" role="status">✓ {message}</p>}
      {error && (
        <div ref={errorRef} className="notice notice-error mb-4" role="alert">
          <p className="font-semibold">✕ {error.error}</p>
          {error.errors.map((p, i) => <p key={i}>{p.field ? `${p.field}: ` : ''}{p.message}</p>)}
        </div>
      )}
    </div>
  );
}
