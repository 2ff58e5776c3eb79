import { useMemo } from 'react';
import { Bar, BarChart, CartesianGrid, Legend, ResponsiveContainer, Tooltip, XAxis, YAxis } from 'recharts';
import type { PoseSummary } from '../../lib/shared/fit-summary';
import { ACCENT, NOMINAL, RULE } from '../chart-colours';
import { PoseTip } from './chart-bits';
import { mm } from './format';
import NumbersBehind from './NumbersBehind';

/** Histogram of the 3-D errors of every pose (fit and hold-out), before and after. */
export default function ErrorHistogram({ histogram: bins, fileBase }: { histogram: PoseSummary['histogram']; fileBase: string }) {
  const histogram = useMemo(() => bins.map((h) => ({ ...h, bin: `${mm(h.from)}–${mm(h.to)}` })), [bins]);
  return (
    <section className="card">
      <h2 className="mb-1">Distribution of 3-D errors</h2>
      <p className="mb-2 text-sm text-ink-soft">Number of poses (fit and hold-out) per error band, before and after.</p>
      <div className="h-64" data-chart="histogram">
        <ResponsiveContainer width="100%" height="100%">
          <BarChart data={histogram} margin={{ top: 8, right: 16, bottom: 24, left: 8 }}>
            <CartesianGrid strokeDasharray="3 3" stroke={RULE} />
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
      <NumbersBehind name={`${fileBase}-histogram.csv`} header={['band_mm', 'before_poses', 'after_poses']} rows={histogram.map((h) => [h.bin, h.before, h.after])}>
        <table className="data-table">
          <thead><tr><th>Band (mm)</th><th className="num">Before (poses)</th><th className="num">After (poses)</th></tr></thead>
          <tbody>{histogram.map((h) => <tr key={h.bin}><td>{h.bin}</td><td className="num">{h.before}</td><td className="num">{h.after}</td></tr>)}</tbody>
        </table>
      </NumbersBehind>
    </section>
  );
}
