import { useMemo, useState } from 'react';
import {
  createColumnHelper,
  flexRender,
  getCoreRowModel,
  getSortedRowModel,
  useReactTable,
  type SortingState,
} from '@tanstack/react-table';
import { CartesianGrid, ComposedChart, Legend, ReferenceLine, ResponsiveContainer, Scatter, Tooltip, XAxis, YAxis } from 'recharts';
import type { FleetOutside, FleetParameter, FleetUnit } from '../../lib/shared/fleet-view';
import { downloadCsv, fmt, fmtSigma, sigmaBackground } from './format';

export interface FleetViewProps {
  modelName: string;
  parameters: FleetParameter[];
  units: FleetUnit[];
  outside: FleetOutside[];
  statistics: { rule: string; alpha: number; criticalScore: number | null; judgedParameters: number };
  positionError: { samples: number; fleet: { maxMm: number; meanMaxMm: number; rmsMm: number } | null };
  /** Out-of-line entries in the whole fleet (`outside` holds those of this page's units). */
  outsideCount?: number;
  /** The page of units shown (units are served page by page, out of line first). */
  unitsPage?: { page: number; pageSize: number; total: number };
}

const GROUP_LABEL: Record<string, string> = { lengths: 'Lengths', twists: 'Twists', offsets: 'Zero offsets', beta: 'Beta', base: 'Base frame', tool: 'Tool point' };

/** A point of the per-unit chart: circle inside the limits, triangle (▲) outside. */
function UnitMark(props: { cx?: number; cy?: number; payload?: { outside: boolean } }) {
  const { cx = 0, cy = 0, payload } = props;
  if (payload?.outside) return <path d={`M${cx},${cy - 7} L${cx + 7},${cy + 5} L${cx - 7},${cy + 5} Z`} fill="var(--color-error)" />;
  return <circle cx={cx} cy={cy} r={5} fill="var(--color-accent)" />;
}

function Distribution({ p, units, critical }: { p: FleetParameter; units: FleetUnit[]; critical: number | null }) {
  const data = units
    .filter((u) => u.deviations[p.key] !== undefined)
    .map((u) => ({ serial: u.serial, deviation: u.deviations[p.key]!, score: u.scores[p.key] ?? null, limits: u.limits[p.key], outside: u.outside.includes(p.key) }));
  const [table, setTable] = useState(false);
  const plotted = p.judged ? data.filter((d) => d.score !== null).map((d) => ({ ...d, y: d.score! })) : data.map((d) => ({ ...d, y: d.deviation }));
  return (
    <section className="card flex flex-col gap-3" aria-label={`Distribution of ${p.key}`} data-distribution={p.key}>
      <div className="flex flex-wrap items-baseline gap-x-6 gap-y-1">
        <h3>{p.key}{p.joint ? ` (${p.joint})` : ''} — {p.judged ? 'score against the other units' : `deviation from nominal, ${p.unit}`}</h3>
        <dl className="flex flex-wrap gap-x-5 text-sm">
          <div><dt className="inline text-ink-soft">units </dt><dd className="inline num">{p.n}</dd></div>
          <div><dt className="inline text-ink-soft">median </dt><dd className="inline num">{fmt(p.median, p.unit, true)} {p.unit}</dd></div>
          <div><dt className="inline text-ink-soft">robust σ (1.4826·MAD) </dt><dd className="inline num">{fmt(p.robustSd, p.unit)} {p.unit}</dd></div>
          {p.judged && critical !== null && <div><dt className="inline text-ink-soft">lines </dt><dd className="inline num">±{critical.toFixed(2)}</dd></div>}
        </dl>
      </div>
      {!p.judged && <p className="notice">● Not judged: {p.reason}.</p>}
      <div style={{ width: '100%', height: 280 }}>
        <ResponsiveContainer>
          <ComposedChart data={plotted} margin={{ top: 10, right: 50, bottom: 30, left: 20 }}>
            <CartesianGrid stroke="var(--color-rule)" />
            <XAxis dataKey="serial" type="category" label={{ value: 'Unit (serial number)', position: 'insideBottom', offset: -20 }} />
            <YAxis label={{ value: p.judged ? 'Score (normal-equivalent)' : `Deviation (${p.unit})`, angle: -90, position: 'insideLeft', style: { textAnchor: 'middle' } }} width={90} tickFormatter={(v: number) => (p.judged ? v.toFixed(1) : fmt(v, p.unit))} />
            <Tooltip formatter={(v) => [p.judged ? Number(v).toFixed(2) : `${fmt(Number(v), p.unit, true)} ${p.unit}`, p.judged ? 'score' : 'deviation']} />
            <Legend verticalAlign="top" />
            {p.judged && critical !== null && <ReferenceLine y={critical} stroke="var(--color-error)" ifOverflow="extendDomain" label={{ value: `+${critical.toFixed(2)}`, position: 'right' }} />}
            {p.judged && critical !== null && <ReferenceLine y={-critical} stroke="var(--color-error)" ifOverflow="extendDomain" label={{ value: `−${critical.toFixed(2)}`, position: 'right' }} />}
            {p.judged && <ReferenceLine y={0} stroke="var(--color-nominal)" strokeDasharray="4 3" />}
            <Scatter name={p.judged ? 'Unit (▲ = out of line: beyond the red lines, the rule above)' : 'Unit (not judged)'} dataKey="y" fill="var(--color-accent)" shape={UnitMark} isAnimationActive={false} />
          </ComposedChart>
        </ResponsiveContainer>
      </div>
      <div className="flex gap-2">
        <button type="button" className="btn btn-quiet" onClick={() => setTable(!table)} aria-expanded={table}>{table ? 'Hide numbers' : 'Show numbers'}</button>
        <button type="button" className="btn btn-quiet" onClick={() => downloadCsv(`fleet-${p.key}.csv`, ['serial', `deviation_${p.unit}`, 'score', `lower_${p.unit}`, `upper_${p.unit}`, 'p', 'out_of_line'], data.map((d) => [d.serial, d.deviation, d.score ?? '', d.limits?.lower ?? '', d.limits?.upper ?? '', d.limits?.p ?? '', d.outside ? 'yes' : 'no']))}>Download CSV</button>
      </div>
      {table && (
        <div className="overflow-x-auto">
          <table className="data-table">
            <thead><tr><th>Unit</th><th className="num">Deviation ({p.unit})</th><th className="num">Limits from the others ({p.unit})</th><th className="num">Score</th><th>Judgement</th></tr></thead>
            <tbody>
              {data.map((d) => (
                <tr key={d.serial}><td>{d.serial}</td><td className="num">{fmt(d.deviation, p.unit, true)}</td><td className="num">{d.limits ? `${fmt(d.limits.lower, p.unit, true)} … ${fmt(d.limits.upper, p.unit, true)}` : '—'}</td><td className="num">{fmtSigma(d.score)}</td><td>{!p.judged ? <span className="text-ink-soft">not judged</span> : d.outside ? <span className="badge text-error">▲ out of line</span> : <span className="text-ink-soft">● in line</span>}</td></tr>
              ))}
            </tbody>
          </table>
        </div>
      )}
    </section>
  );
}

type Row = FleetUnit;
const column = createColumnHelper<Row>();

function Matrix({ parameters, units }: { parameters: FleetParameter[]; units: FleetUnit[] }) {
  const [sorting, setSorting] = useState<SortingState>([]);
  const judged = parameters.filter((p) => p.judged);
  const columns = useMemo(
    () => [
      column.accessor('serial', {
        header: 'Unit',
        cell: (c) => (
          <a href={`/units/${encodeURIComponent(c.getValue())}/drift`} className="font-semibold">
            {c.getValue()}
          </a>
        ),
      }),
      ...judged.map((p) =>
        column.accessor((r) => r.scores[p.key] ?? null, {
          id: p.key,
          header: `${p.key}`,
          sortUndefined: 'last',
          sortingFn: (a, b, id) => Math.abs((a.getValue<number | null>(id) ?? 0)) - Math.abs((b.getValue<number | null>(id) ?? 0)),
          cell: (c) => {
            const z = c.getValue() as number | null;
            const out = c.row.original.outside.includes(p.key);
            const dev = c.row.original.deviations[p.key];
            return (
              <span title={`deviation ${fmt(dev, p.unit, true)} ${p.unit}`} className="flex items-center justify-end gap-1">
                {out && <span aria-label="out of line" className="text-error">▲</span>}
                {fmtSigma(z)}
              </span>
            );
          },
        }),
      ),
    ],
    [parameters],
  );
  const table = useReactTable({ data: units, columns, state: { sorting }, onSortingChange: setSorting, getCoreRowModel: getCoreRowModel(), getSortedRowModel: getSortedRowModel() });
  return (
    <div className="overflow-x-auto">
      <table className="data-table" aria-label="Units × judged parameters, score against the other units">
        <thead>
          {table.getHeaderGroups().map((hg) => (
            <tr key={hg.id}>
              {hg.headers.map((h) => {
                const dir = h.column.getIsSorted();
                return (
                  <th key={h.id} className={h.column.id === 'serial' ? '' : 'num'} aria-sort={dir === 'asc' ? 'ascending' : dir === 'desc' ? 'descending' : 'none'}>
                    <button type="button" className="min-h-11 font-semibold" onClick={h.column.getToggleSortingHandler()}>
                      {flexRender(h.column.columnDef.header, h.getContext())} {dir === 'asc' ? '▴' : dir === 'desc' ? '▾' : ''}
                    </button>
                  </th>
                );
              })}
            </tr>
          ))}
        </thead>
        <tbody>
          {table.getRowModel().rows.map((r) => (
            <tr key={r.id} data-unit-row={r.original.serial}>
              {r.getVisibleCells().map((c) => {
                const isSerial = c.column.id === 'serial';
                const z = isSerial ? null : (c.getValue() as number | null);
                return (
                  <td key={c.id} className={isSerial ? '' : 'num'} style={isSerial ? undefined : { background: sigmaBackground(z) }}>
                    {flexRender(c.column.columnDef.cell, c.getContext())}
                  </td>
                );
              })}
            </tr>
          ))}
        </tbody>
      </table>
      <p className="mt-2 text-sm text-ink-soft">
        Each cell: the unit's score against the other units (the normal-equivalent of its Student-t prediction p-value; the base frame and
        parameters without spread are not judged). Teal below the others, amber above; ▲ marks a score beyond the line of the rule. Click a column title to sort by |score|.
      </p>
    </div>
  );
}

export default function FleetView({ modelName, parameters, units, outside, statistics, positionError, outsideCount, unitsPage }: FleetViewProps) {
  const paged = !!unitsPage && unitsPage.total > units.length;
  const onPage = paged ? ` (units ${(unitsPage!.page - 1) * unitsPage!.pageSize + 1}–${(unitsPage!.page - 1) * unitsPage!.pageSize + units.length} of ${unitsPage!.total}, out of line first)` : '';
  const judged = parameters.filter((p) => p.judged);
  const firstOutside = outside[0]?.key;
  const [selected, setSelected] = useState(firstOutside ?? judged[0]?.key ?? parameters[0]?.key ?? '');
  const p = parameters.find((x) => x.key === selected);
  const groups = [...new Set(parameters.map((x) => x.group))];
  const flagged = units.filter((u) => u.flagged);
  if (!units.length) return <p className="notice">No unit of {modelName} has an approved parameter set yet.</p>;
  return (
    <div className="flex flex-col gap-6">
      <section aria-label="Units out of line" className="flex flex-col gap-2" data-fleet-flags={flagged.map((u) => u.serial).join(' ')}>
        <h2>Units out of line with the fleet</h2>
        <p className="text-sm" data-fleet-rule>{statistics.rule}</p>
        <p className="text-sm text-ink-soft">
          {statistics.judgedParameters} parameter{statistics.judgedParameters === 1 ? '' : 's'} judged per unit; the line is ±{statistics.criticalScore?.toFixed(2) ?? '—'} on the score scale in every chart below.
          Measured by seeded simulation of fleets of identical units (8, 20 and 200 units, 24 parameters): about 4 % of units flagged by chance; a unit with one parameter 6 fleet σ off is flagged in over 95 % of fleets of 8 or more.
        </p>
        {paged && (
          <p className="text-sm" data-fleet-outside-count>
            {outsideCount ?? outside.length} out-of-line value{(outsideCount ?? outside.length) === 1 ? '' : 's'} in the whole fleet; listed here: those of the units on this page{onPage}.
          </p>
        )}
        {outside.length === 0 ? (
          <p className="notice">● {paged && (outsideCount ?? 0) > 0 ? 'No unit on this page is out of line (they come first: see page 1).' : 'No unit is out of line with the rest of the fleet by this rule.'}</p>
        ) : (
          <div className="overflow-x-auto">
            <table className="data-table" data-outside-list>
              <thead><tr><th>Unit</th><th>Parameter</th><th className="num">Deviation</th><th className="num">Limits from the other units</th><th className="num">Score</th><th>State</th></tr></thead>
              <tbody>
                {outside.map((o) => (
                  <tr key={`${o.serial}-${o.key}`}>
                    <td><a href={`/units/${encodeURIComponent(o.serial)}/drift`} className="font-semibold">{o.serial}</a></td>
                    <td><button type="button" className="btn-quiet min-h-11 underline" onClick={() => setSelected(o.key)}>{o.key}</button></td>
                    <td className="num">{fmt(o.deviation, o.unit, true)} {o.unit}</td>
                    <td className="num">{fmt(o.lower, o.unit, true)} … {fmt(o.upper, o.unit, true)} {o.unit}</td>
                    <td className="num">{fmtSigma(o.score)}</td>
                    <td><span className="badge text-error">▲ out of line</span></td>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        )}
      </section>

      <section className="flex flex-col gap-3" aria-label="Distribution per parameter">
        <h2>Distribution per parameter</h2>
        <label className="field max-w-md">
          <span>Parameter</span>
          <select className="input" value={selected} onChange={(e) => setSelected(e.target.value)} name="parameter">
            {groups.map((g) => (
              <optgroup key={g} label={GROUP_LABEL[g] ?? g}>
                {parameters.filter((x) => x.group === g).map((x) => (
                  <option key={x.key} value={x.key}>{x.key}{x.joint ? ` (${x.joint})` : ''}{x.outside.length ? ' ▲' : ''}{x.judged ? '' : ' (not judged)'}</option>
                ))}
              </optgroup>
            ))}
          </select>
        </label>
        {paged && <p className="text-sm text-ink-soft">The chart shows the units on this page{onPage}; the table of all parameters below covers the whole fleet.</p>}
        {p && <Distribution p={p} units={units} critical={statistics.criticalScore} />}
        <details>
          <summary className="min-h-11 cursor-pointer font-semibold">All parameters: spread and what is judged</summary>
          <div className="overflow-x-auto">
            <table className="data-table">
              <thead><tr><th>Group</th><th>Parameter</th><th>Unit</th><th className="num">n</th><th className="num">Mean</th><th className="num">σ (n − 1)</th><th className="num">Median</th><th className="num">Robust σ</th><th>Judged</th><th>Out of line</th></tr></thead>
              <tbody>
                {parameters.map((x) => (
                  <tr key={x.key}>
                    <td>{GROUP_LABEL[x.group] ?? x.group}</td><td>{x.key}</td><td>{x.unit}</td><td className="num">{x.n}</td>
                    <td className="num">{fmt(x.mean, x.unit, true)}</td><td className="num">{fmt(x.sd, x.unit)}</td>
                    <td className="num">{fmt(x.median, x.unit, true)}</td><td className="num">{fmt(x.robustSd, x.unit)}</td>
                    <td>{x.judged ? 'yes' : <span className="text-ink-soft">no: {x.reason}</span>}</td>
                    <td>{x.outside.length ? <span className="text-error">▲ {x.outside.join(', ')}</span> : '—'}</td>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
        </details>
      </section>

      <section className="flex flex-col gap-2" aria-label="Units × parameters">
        <h2>Units × judged parameters (score against the other units)</h2>
        {paged && <p className="text-sm text-ink-soft">Units on this page{onPage}.</p>}
        <Matrix parameters={parameters} units={units} />
      </section>

      <section className="flex flex-col gap-2" aria-label="Position error">
        <h2>Predicted position error: nominal vs calibrated</h2>
        <p className="text-sm text-ink-soft">
          Distance between the tool point predicted by the nominal geometry and by each unit's current set, over {positionError.samples} seeded joint
          configurations within the joint limits, in the robot base frame.
        </p>
        {positionError.fleet && (
          <p className="num text-left whitespace-normal" data-fleet-position-error>
            Fleet: largest {fmt(positionError.fleet.maxMm, 'mm')} mm · mean of unit maxima {fmt(positionError.fleet.meanMaxMm, 'mm')} mm · RMS {fmt(positionError.fleet.rmsMm, 'mm')} mm
          </p>
        )}
        <div className="overflow-x-auto">
        <table className="data-table">
          <thead><tr><th>Unit</th><th className="num">Version</th><th className="num">Max (mm)</th><th className="num">RMS (mm)</th><th>Attention</th></tr></thead>
          <tbody>
            {units.map((u) => (
              <tr key={u.serial}>
                <td>{u.serial}</td><td className="num">v{u.version}</td>
                <td className="num">{fmt(u.positionError.maxMm, 'mm')}</td><td className="num">{fmt(u.positionError.rmsMm, 'mm')}</td>
                <td>{u.needsAttention ? <span className="badge text-attention">▲ drift alert open</span> : '—'}</td>
              </tr>
            ))}
          </tbody>
        </table>
        </div>
      </section>
    </div>
  );
}
