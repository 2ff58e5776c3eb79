import { useState } from 'react';
import { Bar, BarChart, CartesianGrid, Legend, ReferenceLine, ResponsiveContainer, Scatter, ScatterChart, Tooltip, XAxis, YAxis } from 'recharts';
import { downloadCsv } from '../csv-download';

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

const ACCENT = '#0f6e6e';
const NOMINAL = '#8a94a6';
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
          In the tracker frame. A point far from the others, or a cloud that is flat in one view, is worth a second look before a fit.
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
              <div className="h-[300px] w-full">
                <ResponsiveContainer width="100%" height="100%">
                  <ScatterChart margin={{ top: 8, right: 16, bottom: 28, left: 16 }}>
                    <CartesianGrid stroke="#dde1e8" />
                    <XAxis type="number" dataKey="x" name="x" unit=" mm" domain={['auto', 'auto']} tickFormatter={(v: number) => v.toFixed(0)} label={{ value: 'x (mm)', position: 'insideBottom', offset: -16 }} />
                    <YAxis type="number" dataKey={key} name={key} unit=" mm" domain={['auto', 'auto']} tickFormatter={(v: number) => v.toFixed(0)} label={{ value: axis, angle: -90, position: 'insideLeft', offset: -4 }} width={72} />
                    <Tooltip formatter={(v) => (typeof v === 'number' ? mm(v) : String(v))} />
                    <Legend verticalAlign="top" height={28} />
                    <Scatter name="Measured point (one per pose)" data={points} fill={ACCENT} isAnimationActive={false} />
                  </ScatterChart>
                </ResponsiveContainer>
              </div>
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
              <CartesianGrid stroke="#dde1e8" vertical={false} />
              <XAxis dataKey="index" label={{ value: 'pose (file order)', position: 'insideBottom', offset: -16 }} />
              <YAxis tickFormatter={(v: number) => v.toFixed(2)} label={{ value: 'error (mm)', angle: -90, position: 'insideLeft', offset: -4 }} width={72} />
              <Tooltip formatter={(v) => (typeof v === 'number' ? `${mm(v)} mm` : String(v))} labelFormatter={(i) => `pose ${errorData[Number(i) - 1]?.label ?? i}, line ${errorData[Number(i) - 1]?.line ?? ''}`} />
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
