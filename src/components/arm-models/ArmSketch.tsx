import { useEffect, useMemo, useState } from 'react';
import type { ArmGeometry } from '../../lib/engine/types';
import { chainPoints, jointRange, niceTicks, zeroPose, type ChainPoint } from './chain';

/**
 * Side (x–z) and top (x–y) projections of the arm's chain, in the zero pose and in a joint configuration
 * chosen with sliders, drawn from the engine's forward kinematics. A mistyped DH row shows up as a link
 * pointing the wrong way.
 */
export default function ArmSketch({ geometry }: { geometry: ArmGeometry }) {
  const jointKey = geometry.joints.map((j) => `${j.name}:${j.type}:${j.min}:${j.max}`).join('|');
  const [q, setQ] = useState<number[]>(() => zeroPose(geometry));
  // A different joint list (rows added or removed, limits changed) starts again from the zero pose.
  useEffect(() => setQ(zeroPose(geometry)), [jointKey]);

  const computed = useMemo(() => {
    try {
      const qq = q.length === geometry.joints.length ? q : zeroPose(geometry);
      return { zero: chainPoints(geometry, geometry.joints.map(() => 0)), chosen: chainPoints(geometry, qq), error: '' };
    } catch (e) {
      return { zero: [], chosen: [], error: (e as Error).message };
    }
  }, [geometry, q]);

  if (computed.error) return <p className="notice notice-error">The chain cannot be drawn: {computed.error}</p>;
  const all = [...computed.zero, ...computed.chosen];

  return (
    <div className="flex flex-col gap-4" data-arm-sketch>
      <div className="grid gap-4 md:grid-cols-2">
        <Projection title="Side view (x–z)" h="x" v="z" points={all} zero={computed.zero} chosen={computed.chosen} />
        <Projection title="Top view (x–y)" h="x" v="y" points={all} zero={computed.zero} chosen={computed.chosen} />
      </div>
      <p className="text-sm text-ink-soft">
        <span aria-hidden="true" className="mr-1 inline-block w-6 border-t-2 border-dashed border-nominal align-middle" />
        grey dashed: zero pose (all joints 0)
        <span aria-hidden="true" className="ml-4 mr-1 inline-block w-6 border-t-2 border-accent align-middle" />
        teal solid: chosen configuration · ○ base, ● joint frame, ◆ tool point
      </p>
      <fieldset className="grid gap-x-6 gap-y-2 sm:grid-cols-2">
        <legend className="mb-1 font-semibold">Joint configuration</legend>
        {geometry.joints.map((j, i) => {
          const r = jointRange(j);
          const value = q[i] ?? 0;
          return (
            <label key={`${i}-${j.name}`} className="flex items-center gap-3">
              <span className="w-24 shrink-0 text-sm font-semibold">
                {j.name} ({r.unit})
              </span>
              <input
                type="range"
                className="min-h-11 flex-1 accent-[var(--color-accent)]"
                min={r.min}
                max={r.max}
                step={r.step}
                value={value}
                aria-label={`${j.name} in ${r.unit}`}
                onChange={(e) => setQ((old) => old.map((v, k) => (k === i ? Number(e.target.value) : v)))}
              />
              <span className="num w-20 text-sm">{value.toFixed(1)}</span>
            </label>
          );
        })}
      </fieldset>
      <div>
        <button type="button" className="btn btn-quiet" onClick={() => setQ(zeroPose(geometry))}>
          Back to zero pose
        </button>
      </div>
      <table className="data-table" data-chain-table>
        <caption className="mb-1 text-left text-sm text-ink-soft">Frame origins in the chosen configuration (mm, in the frame the base is given in; robot base frame when the file has none)</caption>
        <thead>
          <tr>
            <th>Frame</th>
            <th className="num">x (mm)</th>
            <th className="num">y (mm)</th>
            <th className="num">z (mm)</th>
          </tr>
        </thead>
        <tbody>
          {computed.chosen.map((p, i) => (
            <tr key={i}>
              <td>{p.label}</td>
              <td className="num">{mm(p.x)}</td>
              <td className="num">{mm(p.y)}</td>
              <td className="num">{mm(p.z)}</td>
            </tr>
          ))}
        </tbody>
      </table>
    </div>
  );
}

/** mm with 3 decimals; rounding noise never shows as "-0.000". */
const mm = (v: number) => (Math.abs(v) < 0.0005 ? 0 : v).toFixed(3);

const W = 380;
const H = 320;
const M = { left: 58, right: 12, top: 26, bottom: 44 };

function Projection({ title, h, v, points, zero, chosen }: { title: string; h: 'x'; v: 'y' | 'z'; points: ChainPoint[]; zero: ChainPoint[]; chosen: ChainPoint[] }) {
  // One scale for both axes, so lengths and angles look as they are.
  const hs = points.map((p) => p[h]).concat(0);
  const vs = points.map((p) => p[v]).concat(0);
  let [h0, h1, v0, v1] = [Math.min(...hs), Math.max(...hs), Math.min(...vs), Math.max(...vs)];
  const span = Math.max(h1 - h0, v1 - v0, 1) * 1.1;
  const hc = (h0 + h1) / 2;
  const vc = (v0 + v1) / 2;
  const pw = W - M.left - M.right;
  const ph = H - M.top - M.bottom;
  const scale = Math.min(pw, ph) / span;
  h0 = hc - pw / scale / 2;
  h1 = hc + pw / scale / 2;
  v0 = vc - ph / scale / 2;
  v1 = vc + ph / scale / 2;
  const X = (val: number) => M.left + (val - h0) * scale;
  const Y = (val: number) => M.top + (v1 - val) * scale;
  const line = (ps: ChainPoint[]) => ps.map((p) => `${X(p[h]).toFixed(1)},${Y(p[v]).toFixed(1)}`).join(' ');
  const hTicks = niceTicks(h0, h1, 5);
  const vTicks = niceTicks(v0, v1, 5);
  return (
    <figure className="card p-2">
      <svg viewBox={`0 0 ${W} ${H}`} className="h-auto w-full" role="img" aria-label={`${title}: arm chain projection`}>
        <text x={M.left} y={16} fontSize="13" fontWeight="600" fill="var(--color-ink)">
          {title}
        </text>
        {hTicks.map((t) => (
          <g key={`h${t}`}>
            <line x1={X(t)} x2={X(t)} y1={M.top} y2={H - M.bottom} stroke="var(--color-rule)" />
            <text x={X(t)} y={H - M.bottom + 14} fontSize="10" textAnchor="middle" fill="var(--color-ink-soft)">
              {t}
            </text>
          </g>
        ))}
        {vTicks.map((t) => (
          <g key={`v${t}`}>
            <line x1={M.left} x2={W - M.right} y1={Y(t)} y2={Y(t)} stroke="var(--color-rule)" />
            <text x={M.left - 4} y={Y(t) + 3} fontSize="10" textAnchor="end" fill="var(--color-ink-soft)">
              {t}
            </text>
          </g>
        ))}
        <text x={M.left + pw / 2} y={H - 8} fontSize="11" textAnchor="middle" fill="var(--color-ink)">
          {h} (mm)
        </text>
        <text x={14} y={M.top + ph / 2} fontSize="11" textAnchor="middle" fill="var(--color-ink)" transform={`rotate(-90 14 ${M.top + ph / 2})`}>
          {v} (mm)
        </text>
        <polyline points={line(zero)} fill="none" stroke="var(--color-nominal)" strokeWidth="2" strokeDasharray="5 4" />
        <polyline points={line(chosen)} fill="none" stroke="var(--color-accent)" strokeWidth="3" strokeLinejoin="round" />
        {chosen.map((p, i) => {
          const cx = X(p[h]);
          const cy = Y(p[v]);
          if (i === 0) return <circle key={i} cx={cx} cy={cy} r="5" fill="white" stroke="var(--color-ink)" strokeWidth="1.5" />;
          if (i === chosen.length - 1) return <rect key={i} x={cx - 4} y={cy - 4} width="8" height="8" transform={`rotate(45 ${cx} ${cy})`} fill="var(--color-accent)" />;
          return <circle key={i} cx={cx} cy={cy} r="3.5" fill="var(--color-accent)" />;
        })}
      </svg>
    </figure>
  );
}
