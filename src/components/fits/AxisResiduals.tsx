import { CartesianGrid, Legend, ResponsiveContainer, Scatter, ScatterChart, Symbols, Tooltip, XAxis, YAxis } from 'recharts';
import { ACCENT, ATTENTION, NOMINAL, RULE } from '../chart-colours';
import { crossMarker, PoseTip } from './chart-bits';
import { mm } from './format';
import NumbersBehind from './NumbersBehind';
import PosePages from './PosePages';
import type { ResidualChartProps } from './residual-rows';

/** The three axes: series name, axis word, data field, colour and legend/marker shape (not colour alone). */
const SERIES = [
  ['dx', 'x', 'dx', ACCENT, 'circle'],
  ['dy', 'y', 'dy', NOMINAL, 'square'],
  ['dz', 'z', 'dz', ATTENTION, 'triangle'],
] as const;

/** Scatter of the residual per axis after calibration; excluded poses as a grey ✕. */
export default function AxisResiduals({ data, count, excludedCount, fitId, fileBase, csvHref }: ResidualChartProps) {
  return (
    <section className="card">
      <h2 className="mb-1">Residual per axis, after calibration</h2>
      <p className="mb-2 text-sm text-ink-soft">Measured minus predicted in the tracker frame: x (circle), y (square), z (triangle){excludedCount ? '; excluded poses as ✕ in grey' : ''}.</p>
      <div className="h-64" data-chart="axes">
        <ResponsiveContainer width="100%" height="100%">
          <ScatterChart margin={{ top: 8, right: 16, bottom: 24, left: 16 }}>
            <CartesianGrid strokeDasharray="3 3" stroke={RULE} />
            <XAxis type="number" dataKey="index" name="Pose" label={{ value: 'Pose (order in the file)', position: 'insideBottom', offset: -12 }} />
            <YAxis type="number" dataKey="v" name="Residual" label={{ value: 'Residual (mm)', angle: -90, position: 'insideLeft' }} />
            <Tooltip
              content={({ active, payload }) => {
                const d = payload?.[0]?.payload as { label: string; line: number; poseRole: string; axis: string; v: number } | undefined;
                return d ? <PoseTip active={active} heading={`Pose ${d.label} (line ${d.line})`} role={d.poseRole} rows={[{ name: `Residual ${d.axis}`, value: `${mm(d.v)} mm` }]} /> : null;
              }}
            />
            <Legend verticalAlign="top" />
            {SERIES.map(([name, axis, key, colour, symbol]) => (
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
      <NumbersBehind name={`${fileBase}-residuals.csv`} header={[]} rows={[]} csvHref={csvHref}>
        <PosePages fitId={fitId} total={count} axes />
      </NumbersBehind>
    </section>
  );
}
