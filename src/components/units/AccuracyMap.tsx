import { useEffect, useState } from 'react';
import type { AccuracyMap as Map, AccuracyPlane } from '../../lib/engine/accuracy-map';
import { api } from '../../lib/shared/api-client';
import { downloadCsv } from '../csv-download';

/** Same colour scale as the certificate (certificate-layout.ts mapColour): pale → amber → deep brown. */
function blend(a: number[], b: number[], t: number) {
  return `rgb(${a.map((v, i) => Math.round(v + (b[i]! - v) * Math.min(1, Math.max(0, t)))).join(',')})`;
}
const PALE = [0xee, 0xf6, 0xf6], MID = [0xe3, 0xb0, 0x4b], DARK = [0x7a, 0x2e, 0x0e];
const colour = (t: number) => (t < 0.5 ? blend(PALE, MID, t * 2) : blend(MID, DARK, (t - 0.5) * 2));
const AXES = { xy: ['x', 'y', 'z'], xz: ['x', 'z', 'y'], yz: ['y', 'z', 'x'] } as const;
const mm = (x: number) => x.toFixed(3);

function Plane({ p, max }: { p: AccuracyPlane; max: number }) {
  const n = p.cells.length;
  const [u, v, f] = AXES[p.axes];
  return (
    <figure className="min-w-0">
      <figcaption className="mb-1 text-sm font-semibold">
        {u}–{v} plane at {f} = {p.fixed.at.toFixed(0)} ± {p.fixed.halfThickness.toFixed(0)} mm
      </figcaption>
      <svg viewBox={`0 0 ${n} ${n}`} className="block h-auto w-full max-w-[16rem] border border-rule" role="img" aria-label={`${u}–${v} plane, mean predicted change per cell`}>
        {p.cells.map((row, iv) =>
          row.map((c, iu) => (c === null ? null : <rect key={`${iv}-${iu}`} x={iu} y={n - 1 - iv} width={1.02} height={1.02} fill={colour(max > 0 ? c / max : 0)} />)),
        )}
      </svg>
      <p className="text-xs text-ink-soft">
        {u}: {p.u[0]!.toFixed(0)} … {p.u.at(-1)!.toFixed(0)} mm → · {v}: {p.v[0]!.toFixed(0)} … {p.v.at(-1)!.toFixed(0)} mm ↑
      </p>
    </figure>
  );
}

/** Before/after accuracy map of one parameter set (fetched from the API, computed off the request thread). */
export default function AccuracyMap({ setId, version, serial }: { setId: string; version: number; serial: string }) {
  const [map, setMap] = useState<Map | null>(null);
  const [error, setError] = useState<string | null>(null);
  useEffect(() => {
    api<Map>(`/api/parameter-sets/${setId}/accuracy-map`).then((r) => (r.error ? setError(r.error.error) : setMap(r.data)), (e) => setError(String(e)));
  }, [setId]);
  if (error) return <p className="text-error">The accuracy map could not be loaded: {error}</p>;
  if (!map) return <p className="text-ink-soft" data-map-loading>Computing the map (40 000 sampled configurations)…</p>;
  const csv = () =>
    downloadCsv(
      `${serial}-v${version}-accuracy-map.csv`,
      ['plane', 'u_from_mm', 'u_to_mm', 'v_from_mm', 'v_to_mm', 'mean_change_mm'],
      map.planes.flatMap((p) => p.cells.flatMap((row, iv) => row.map((c, iu) => [p.axes, p.u[iu], p.u[iu + 1], p.v[iv], p.v[iv + 1], c]))),
    );
  return (
    <div data-accuracy-map>
      <div className="grid gap-4 sm:grid-cols-3">
        {map.planes.map((p) => (
          <Plane key={p.axes} p={p} max={map.scaleMaxMm} />
        ))}
      </div>
      <div className="mt-3 flex flex-wrap items-center gap-3 text-sm">
        <span>0 mm</span>
        <span className="inline-block h-3 w-40 border border-rule" style={{ background: `linear-gradient(to right, ${colour(0)}, ${colour(0.5)}, ${colour(1)})` }} aria-hidden="true" />
        <span data-map-scale>{mm(map.scaleMaxMm)} mm</span>
        <button type="button" className="btn btn-quiet" onClick={csv}>
          Download CSV
        </button>
      </div>
      <p className="mt-2 text-sm text-ink-soft">
        Colour: predicted |calibrated − nominal| position of the target point, mean per cell, scale 0 to {mm(map.scaleMaxMm)} mm; blank cells are not reached. Over all {map.samples} sampled
        configurations: mean {mm(map.meanMm)} mm, largest {mm(map.maxMm)} mm. Joint values drawn uniformly within the limits (seed {map.seed}), each geometry in its own robot base frame.
      </p>
    </div>
  );
}
