import { useState } from 'react';
import { Area, CartesianGrid, ComposedChart, Legend, Line, ResponsiveContainer, Scatter, Tooltip, XAxis, YAxis } from 'recharts';
import type { DriftParameter } from '../../lib/shared/drift-view';
import { downloadCsv, fmt } from '../fleet/format';

const day = (t: number) => new Date(t).toISOString().slice(0, 10);

/** A version point: circle, or an amber triangle (▲) when its change from the previous version exceeds the tolerance. */
function VersionMark(props: { cx?: number; cy?: number; payload?: { exceeded?: boolean } }) {
  const { cx = 0, cy = 0, payload } = props;
  if (payload?.exceeded) return <path d={`M${cx},${cy - 8} L${cx + 8},${cy + 6} L${cx - 8},${cy + 6} Z`} fill="var(--color-attention)" stroke="var(--color-ink)" strokeWidth={0.5} />;
  return <circle cx={cx} cy={cy} r={4.5} fill="var(--color-accent)" />;
}

function History({ p }: { p: DriftParameter }) {
  const sets = p.points.filter((x) => x.kind === 'set');
  const fitsOnly = p.points.filter((x) => x.kind === 'fit');
  const data = sets.map((x) => ({
    t: Date.parse(x.at),
    value: x.value,
    band: x.standardError !== null ? [x.value - x.standardError, x.value + x.standardError] : [x.value, x.value],
    exceeded: x.exceeded,
    version: x.version,
  }));
  const fitData = fitsOnly.map((x) => ({ t: Date.parse(x.at), fit: x.value }));
  return (
    <div style={{ width: '100%', height: 320 }} data-drift-chart={p.key}>
      <ResponsiveContainer>
        <ComposedChart data={data} margin={{ top: 10, right: 30, bottom: 30, left: 20 }}>
          <CartesianGrid stroke="var(--color-rule)" />
          <XAxis dataKey="t" type="number" scale="time" domain={['dataMin', 'dataMax']} tickFormatter={day} label={{ value: 'Approval date', position: 'insideBottom', offset: -20 }} padding={{ left: 20, right: 20 }} />
          <YAxis domain={['auto', 'auto']} width={100} tickFormatter={(v: number) => fmt(v, p.unit)} label={{ value: `${p.key} (${p.unit})`, angle: -90, position: 'insideLeft', style: { textAnchor: 'middle' } }} />
          <Tooltip labelFormatter={(t) => day(Number(t))} formatter={(v, name) => [Array.isArray(v) ? v.map((x) => fmt(Number(x), p.unit)).join(' … ') : `${fmt(Number(v), p.unit)} ${p.unit}`, String(name)]} />
          <Legend verticalAlign="top" />
          <Area dataKey="band" name="± one standard error" fill="var(--color-accent)" fillOpacity={0.18} stroke="none" isAnimationActive={false} />
          <Line dataKey="value" name="Approved versions (▲ = change beyond tolerance)" stroke="var(--color-accent)" dot={VersionMark} isAnimationActive={false} />
          {fitData.length > 0 && <Scatter data={fitData} dataKey="fit" name="Fitted fits (not necessarily approved)" fill="var(--color-nominal)" isAnimationActive={false} />}
        </ComposedChart>
      </ResponsiveContainer>
    </div>
  );
}

export default function DriftView({ serial, parameters, includeFits }: { serial: string; parameters: DriftParameter[]; includeFits: boolean }) {
  const exceededKeys = parameters.filter((p) => p.points.some((x) => x.exceeded)).map((p) => p.key);
  const [selected, setSelected] = useState(exceededKeys[0] ?? parameters[0]?.key ?? '');
  const p = parameters.find((x) => x.key === selected);
  const versions = parameters[0]?.points.filter((x) => x.kind === 'set').length ?? 0;
  if (!versions) return <p className="notice">Unit {serial} has no approved parameter set yet.</p>;
  return (
    <div className="flex flex-col gap-4">
      <div className="flex flex-wrap items-end gap-4">
        <label className="field min-w-64">
          <span>Parameter</span>
          <select className="input" name="parameter" value={selected} onChange={(e) => setSelected(e.target.value)}>
            {parameters.map((x) => (
              <option key={x.key} value={x.key}>{x.key}{x.joint ? ` (${x.joint})` : ''}{exceededKeys.includes(x.key) ? ' ▲ beyond tolerance' : ''}</option>
            ))}
          </select>
        </label>
        <a className="btn btn-quiet" href={`?fits=${includeFits ? 'false' : 'true'}`}>{includeFits ? 'Show approved versions only' : 'Also show every fitted fit'}</a>
      </div>
      {p && (
        <section className="card flex flex-col gap-3" aria-label={`History of ${p.key}`}>
          <h2>{p.key}{p.joint ? ` (${p.joint})` : ''} over time</h2>
          <p className="text-sm text-ink-soft">Nominal {fmt(p.nominal, p.unit)} {p.unit} · {p.tolerance === null ? 'not checked for drift (base frame: where the tracker stood)' : `tolerance for a change between versions ±${p.tolerance} ${p.unit}`}. Angle changes are wrapped at ±180°. Each change is also shown as a multiple of its combined standard error √(SE₁² + SE₂²); ▲ beyond 3× means more than the two fits' uncertainty explains. An alert fires on the tolerance and says whether the change is also beyond 3 combined SE.</p>
          <History p={p} />
          <div className="flex gap-2">
            <button
              type="button"
              className="btn btn-quiet"
              onClick={() =>
                downloadCsv(`${serial}-${p.key}-history.csv`, ['kind', 'version', 'at', `value_${p.unit}`, `standard_error_${p.unit}`, `change_${p.unit}`, 'beyond_tolerance'], p.points.map((x) => [x.kind, x.version, x.at, x.value, x.standardError, x.change, x.exceeded ? 'yes' : 'no']))
              }
            >
              Download CSV
            </button>
          </div>
          <table className="data-table">
            <thead><tr><th>Version</th><th>Date</th><th className="num">Value ({p.unit})</th><th className="num">Standard error ({p.unit})</th><th className="num">Change ({p.unit})</th><th>Change vs tolerance</th><th className="num">Change / combined SE</th></tr></thead>
            <tbody>
              {p.points.map((x) => (
                <tr key={`${x.kind}-${x.id}`} className={x.exceeded ? 'bg-attention-soft' : undefined}>
                  <td>{x.kind === 'set' ? `v${x.version} (${x.state})` : `fit (${x.state.replace('_', ' ')})`}</td>
                  <td>{x.at.slice(0, 10)}</td>
                  <td className="num">{fmt(x.value, p.unit)}</td>
                  <td className="num">{fmt(x.standardError, p.unit)}</td>
                  <td className="num">{fmt(x.change, p.unit, true)}</td>
                  <td>{x.exceeded ? <span className="badge text-attention">▲ beyond tolerance</span> : x.change === null ? '—' : p.tolerance === null ? <span className="text-ink-soft">◌ not checked</span> : <span className="text-ink-soft">● within</span>}</td>
                  <td className="num">{x.multiple === null || x.multiple === undefined ? '—' : `${x.multiple >= 0 ? '+' : ''}${x.multiple.toFixed(1)}×`}{x.beyondSe ? ' ▲' : ''}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </section>
      )}
      <section className="flex flex-col gap-2" aria-label="Latest change of every parameter">
        <h2>Latest change, every parameter</h2>
        <div className="overflow-x-auto">
          <table className="data-table">
            <thead><tr><th>Parameter</th><th className="num">Current value</th><th className="num">Change from previous</th><th className="num">Tolerance</th><th>State</th></tr></thead>
            <tbody>
              {parameters.map((x) => {
                const sets = x.points.filter((y) => y.kind === 'set');
                const last = sets[sets.length - 1];
                return (
                  <tr key={x.key} className={last?.exceeded ? 'bg-attention-soft' : undefined}>
                    <td><button type="button" className="min-h-11 underline" onClick={() => setSelected(x.key)}>{x.key}</button></td>
                    <td className="num">{fmt(last?.value, x.unit)} {x.unit}</td>
                    <td className="num">{fmt(last?.change, x.unit, true)} {x.unit}</td>
                    <td className="num">{x.tolerance === null ? 'not checked' : `±${x.tolerance} ${x.unit}`}</td>
                    <td>{last?.exceeded ? <span className="badge text-attention">▲ beyond tolerance</span> : last?.change === null ? '— first version' : x.tolerance === null ? <span className="text-ink-soft">◌ not checked</span> : <span className="text-ink-soft">● within</span>}</td>
                  </tr>
                );
              })}
            </tbody>
          </table>
        </div>
      </section>
    </div>
  );
}
