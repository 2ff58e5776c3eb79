import { useEffect, useRef, useState } from 'react';
import { Bar, BarChart, CartesianGrid, Legend, ReferenceLine, ResponsiveContainer, Scatter, ScatterChart, Tooltip, XAxis, YAxis } from 'recharts';
import { downloadCsv } from '../csv-download';
import { ACCENT, NOMINAL, RULE } from '../chart-colours';
import { PoseTip } from '../fits/chart-bits';

export interface ChartPoint {
  label: string;
  x: number;
  y: number;
  z: number;
}

export interface ChartError {
  label: string;
  line: number;
  error: number;
}

interface Props {
  points: ChartPoint[];
  errors: ChartError[];
  /** Total poses in the session (the charts may show an even sample of a very large one). */
  poseCount: number;
  rms: number;
  fileBase: string;
}

const mm = (v: number) => v.toFixed(3);


function NumbersToggle({ shown, onToggle, onCsv, what }: { shown: boolean; onToggle: () => void; onCsv: () => void; what: string }) {
  return (
    <div className="mt-2 flex flex-wrap gap-2">
      <button type="button" className="btn btn-quiet" onClick={onToggle} aria-expanded={shown}>
        {shown ? `Hide the numbers` : `Show the numbers (${what})`}
      </button>
      <button type="button" className="btn btn-quiet" onClick={onCsv}>
        Download CSV
      </button>
    </div>
  );
}

// Layout of the length-against-length views; the plot area is made square from these so 1 mm is as long on
// the horizontal axis as on the vertical one.
const M = { top: 8, right: 16, bottom: 8, left: 8 };
const Y_AXIS_W = 72;
const X_AXIS_H = 44;
const LEGEND_H = 28;

/** 1-2-5 step near `target`. */
function niceStep(target: number) {
  const base = 10 ** Math.floor(Math.log10(target));
  return ([1, 2, 5, 10].filter((s) => s * base <= target).pop() ?? 1) * base;
}

/** The same span on both axes, centred on the data, with round ticks. */
export function equalDomains(a: number[], b: number[]) {
  const lo = (v: number[]) => Math.min(...v), hi = (v: number[]) => Math.max(...v);
  const span = Math.max(hi(a) - lo(a), hi(b) - lo(b), 1) * 1.08;
  const step = niceStep(span / 5);
  const around = (v: number[]) => {
    const c = (lo(v) + hi(v)) / 2;
    const from = Math.floor((c - span / 2) / step) * step;
    const n = Math.ceil(span / step) + 1;
    return { domain: [from, from + n * step] as [number, number], ticks: Array.from({ length: n + 1 }, (_, k) => from + k * step) };
  };
  // Both axes get the same number of steps, so the spans (and the mm per pixel on a square plot) are equal.
  const x = around(a), y = around(b);
  const steps = Math.max(x.ticks.length, y.ticks.length) - 1;
  const fit = (d: { domain: [number, number] }) => ({ domain: [d.domain[0], d.domain[0] + steps * step] as [number, number], ticks: Array.from({ length: steps + 1 }, (_, k) => d.domain[0] + k * step) });
  return { x: fit(x), y: fit(y) };
}

/** A scatter of two lengths at equal scale: the plot area is square and both axes span the same millimetres. */
function EqualScatter({ points, yKey, yTitle }: { points: ChartPoint[]; yKey: 'y' | 'z'; yTitle: string }) {
  const box = useRef<HTMLDivElement>(null);
  const [width, setWidth] = useState(0);
  useEffect(() => {
    const el = box.current;
    if (!el) return;
    const ro = new ResizeObserver(() => setWidth(el.clientWidth));
    ro.observe(el);
    setWidth(el.clientWidth);
    return () => ro.disconnect();
  }, []);
  const plot = Math.max(120, Math.min(width, 560) - M.left - M.right - Y_AXIS_W);
  const height = plot + M.top + M.bottom + X_AXIS_H + LEGEND_H;
  const { x, y } = equalDomains(points.map((p) => p.x), points.map((p) => p[yKey]));
  return (
    <div ref={box} className="w-full" data-equal-scale data-plot-size={plot}>
      {width > 0 && (
        <ScatterChart width={plot + M.left + M.right + Y_AXIS_W} height={height} margin={M}>
          <CartesianGrid stroke={RULE} />
          <XAxis type="number" dataKey="x" name="x" domain={x.domain} ticks={x.ticks} allowDataOverflow height={X_AXIS_H} tickFormatter={(v: number) => v.toFixed(0)} label={{ value: 'x (mm)', position: 'insideBottom', offset: 0 }} />
          <YAxis type="number" dataKey={yKey} name={yKey} domain={y.domain} ticks={y.ticks} allowDataOverflow width={Y_AXIS_W} tickFormatter={(v: number) => v.toFixed(0)} label={{ value: yTitle, angle: -90, position: 'insideLeft', offset: 4 }} />
          <Tooltip
            content={({ active, payload }) => {
              const d = payload?.[0]?.payload as ChartPoint | undefined;
              return d ? <PoseTip active={active} heading={`Pose ${d.label}`} role="measured pose (this session, before any fit)" rows={[{ name: 'x', value: `${mm(d.x)} mm` }, { name: yKey, value: `${mm(d[yKey])} mm` }]} /> : null;
            }}
          />
          <Legend verticalAlign="top" height={LEGEND_H} />
          <Scatter name="Measured point (one per pose)" data={points} fill={ACCENT} isAnimationActive={false} />
        </ScatterChart>
      )}
    </div>
  );
}

/** Sanity charts of a session: the measured points from above and from the side, and the nominal error per pose. */
export default function SessionCharts({ points, errors, poseCount, rms, fileBase }: Props) {
  const [showPoints, setShowPoints] = useState(false);
  const [showErrors, setShowErrors] = useState(false);
  const sampled = points.length < poseCount;
  const errorData = errors.map((e, i) => ({ ...e, index: i + 1 }));

  return (
    <div className="flex flex-col gap-6">
      <section aria-labelledby="chart-points" data-chart="points">
        <h3 id="chart-points" className="mb-1">Measured target points</h3>
        <p className="mb-2 text-ink-soft">
          In the tracker frame, at equal scale on both axes (a millimetre is as long across as up). A point far from the others, or a cloud that is flat in one view, is worth a second look before a fit.
          {sampled && ` An even sample of ${points.length} of ${poseCount} poses is drawn.`}
        </p>
        <div className="grid gap-4 lg:grid-cols-2">
          {(
            [
              ['Top view (x–y)', 'y', 'y (mm)'],
              ['Side view (x–z)', 'z', 'z (mm)'],
            ] as const
          ).map(([title, key, axis]) => (
            <figure key={key} className="min-w-0">
              <figcaption className="mb-1 font-semibold">{title}</figcaption>
              <EqualScatter points={points} yKey={key} yTitle={axis} />
            </figure>
          ))}
        </div>
        <NumbersToggle
          shown={showPoints}
          what={`${points.length} points`}
          onToggle={() => setShowPoints(!showPoints)}
          onCsv={() => downloadCsv(`${fileBase}-points.csv`, ['pose', 'x_mm', 'y_mm', 'z_mm'], points.map((p) => [p.label, p.x, p.y, p.z]))}
        />
        {showPoints && (
          <div className="mt-2 max-h-[420px] overflow-auto">
            <table className="data-table" data-points-table>
              <thead>
                <tr>
                  <th>Pose</th>
                  <th className="num">x (mm)</th>
                  <th className="num">y (mm)</th>
                  <th className="num">z (mm)</th>
                </tr>
              </thead>
              <tbody>
                {points.map((p, k) => (
                  <tr key={k}>
                    <td>{p.label}</td>
                    <td className="num">{mm(p.x)}</td>
                    <td className="num">{mm(p.y)}</td>
                    <td className="num">{mm(p.z)}</td>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        )}
      </section>

      <section aria-labelledby="chart-errors" data-chart="errors">
        <h3 id="chart-errors" className="mb-1">Nominal model error per pose</h3>
        <p className="mb-2 text-ink-soft">Distance between the measured point and the point the nominal model predicts, in file order{sampled ? ' (sampled like the points)' : ''}.</p>
        <div className="h-[280px] w-full">
          <ResponsiveContainer width="100%" height="100%">
            <BarChart data={errorData} margin={{ top: 8, right: 16, bottom: 28, left: 16 }}>
              <CartesianGrid stroke={RULE} vertical={false} />
              <XAxis dataKey="index" label={{ value: 'pose (file order)', position: 'insideBottom', offset: -16 }} />
              <YAxis tickFormatter={(v: number) => v.toFixed(2)} label={{ value: 'error (mm)', angle: -90, position: 'insideLeft', offset: -4 }} width={72} />
              <Tooltip
                content={({ active, payload }) => {
                  const d = payload?.[0]?.payload as (typeof errorData)[number] | undefined;
                  return d ? <PoseTip active={active} heading={`Pose ${d.label} (line ${d.line})`} role="measured pose (this session, before any fit)" rows={[{ name: 'Nominal model error', value: `${mm(d.error)} mm` }]} /> : null;
                }}
              />
              <Legend verticalAlign="top" height={28} />
              <Bar dataKey="error" name="Nominal model error (mm)" fill={NOMINAL} isAnimationActive={false} />
              <ReferenceLine y={rms} stroke={ACCENT} strokeDasharray="6 4" label={{ value: `RMS ${mm(rms)} mm`, position: 'insideTopRight', fill: ACCENT }} />
            </BarChart>
          </ResponsiveContainer>
        </div>
        <NumbersToggle
          shown={showErrors}
          what={`${errors.length} poses`}
          onToggle={() => setShowErrors(!showErrors)}
          onCsv={() => downloadCsv(`${fileBase}-nominal-error.csv`, ['pose', 'line', 'error_mm'], errors.map((e) => [e.label, e.line, e.error]))}
        />
        {showErrors && (
          <div className="mt-2 max-h-[420px] overflow-auto">
            <table className="data-table" data-errors-table>
              <thead>
                <tr>
                  <th>Pose</th>
                  <th className="num">Line</th>
                  <th className="num">Error (mm)</th>
                </tr>
              </thead>
              <tbody>
                {errors.map((e, k) => (
                  <tr key={k}>
                    <td>{e.label}</td>
                    <td className="num">{e.line}</td>
                    <td className="num">{mm(e.error)}</td>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        )}
      </section>
    </div>
  );
}
