import { Bar, BarChart, CartesianGrid, Cell, Legend, ResponsiveContainer, Tooltip, XAxis, YAxis } from 'recharts';
import { ACCENT, HOLLOW, NOMINAL, RULE } from '../chart-colours';
import { PoseTip } from './chart-bits';
import { mm } from './format';
import NumbersBehind from './NumbersBehind';
import PosePages from './PosePages';
import type { ResidualChartProps, ResidualRow } from './residual-rows';

/** Bar chart of the 3-D residual per pose, before and after; excluded poses as hollow dashed bars. */
export default function ResidualBars({ data, count, excludedCount, fitId, fileBase, csvHref }: ResidualChartProps) {
  const sampled = data.length < count;
  const hollow = (d: ResidualRow, colour: string) =>
    d.poseRole === 'excluded' ? { fill: HOLLOW, stroke: colour, strokeDasharray: '3 2' } : { fill: colour, stroke: undefined, strokeDasharray: undefined };
  return (
    <section className="card mb-6">
      <h2 className="mb-1">Residual per pose</h2>
      <p className="mb-2 text-sm text-ink-soft">3-D distance between measured and predicted point, with the nominal geometry (grey) and the calibrated one (teal).{excludedCount ? ` Excluded poses (${excludedCount}, not used by the fit) are drawn as hollow, dashed bars.` : ''}{sampled ? ` ${data.length} of the ${count} poses drawn: every outlier and excluded pose, the largest residuals, and an even sample of the rest; the numbers hold all ${count}.` : ''}</p>
      <div className="h-72" data-chart="residuals">
        <ResponsiveContainer width="100%" height="100%">
          <BarChart data={data} margin={{ top: 8, right: 16, bottom: 24, left: 16 }}>
            <CartesianGrid strokeDasharray="3 3" stroke={RULE} />
            <XAxis dataKey="index" label={{ value: 'Pose (order in the file)', position: 'insideBottom', offset: -12 }} />
            <YAxis label={{ value: 'Residual (mm)', angle: -90, position: 'insideLeft' }} />
            <Tooltip
              content={({ active, payload }) => {
                const d = payload?.[0]?.payload as ResidualRow | undefined;
                return d ? <PoseTip active={active} heading={`Pose ${d.label} (line ${d.line})`} role={d.poseRole} rows={[{ name: 'Before (nominal)', value: `${mm(d.before)} mm` }, { name: 'After (calibrated)', value: `${mm(d.after)} mm` }]} /> : null;
              }}
            />
            <Legend verticalAlign="top" />
            <Bar dataKey="before" name="Before (nominal)" fill={NOMINAL} isAnimationActive={false}>
              {data.map((d) => <Cell key={d.index} {...hollow(d, NOMINAL)} />)}
            </Bar>
            <Bar dataKey="after" name="After (calibrated)" fill={ACCENT} isAnimationActive={false}>
              {data.map((d) => <Cell key={d.index} {...hollow(d, ACCENT)} />)}
            </Bar>
          </BarChart>
        </ResponsiveContainer>
      </div>
      <NumbersBehind name={`${fileBase}-residuals.csv`} header={[]} rows={[]} csvHref={csvHref}>
        <PosePages fitId={fitId} total={count} />
      </NumbersBehind>
    </section>
  );
}
