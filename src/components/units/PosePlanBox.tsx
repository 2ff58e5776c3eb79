import { useEffect, useMemo, useState } from 'react';
import type { PoseSetQuality as Quality } from '../../lib/engine/planner';
import type { ArmGeometry } from '../../lib/engine/types';
import ArmView3D from '../view3d/ArmView3D';
import { planView } from '../view3d/build';
import { api, type ApiError } from '../../lib/shared/api-client';

interface Plan {
  count: number;
  seed: number;
  source: { kind: 'parameter_set'; version: number } | { kind: 'nominal'; revision: number };
  quality: Quality;
  geometry: ArmGeometry;
  poses: { label: string; q: number[] }[];
}

const sig = (v: number) => (Number.isFinite(v) ? v.toPrecision(4) : '∞');

/** "Pose plan for the next visit": count and seed → quality figures, warnings and the CSV download. */
export default function PosePlanBox({ serial }: { serial: string }) {
  // Set once React has taken over, so nothing submits natively before that (and tests can wait for it).
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const [count, setCount] = useState('60');
  const [seed, setSeed] = useState('1');
  const [plan, setPlan] = useState<Plan | null>(null);
  const [error, setError] = useState<ApiError | null>(null);
  const [busy, setBusy] = useState(false);
  const base = `/api/units/${encodeURIComponent(serial)}/pose-plan`;
  const csvHref = `${base}?${new URLSearchParams({ count, seed, format: 'csv' })}`;

  async function make(e: React.FormEvent) {
    e.preventDefault();
    setBusy(true);
    const r = await api<Plan>(base, { method: 'POST', json: { count, seed, format: 'json' } });
    setBusy(false);
    if (r.error) {
      setPlan(null);
      return setError(r.error);
    }
    setError(null);
    setPlan(r.data);
  }

  const view3d = useMemo(() => (plan ? planView(plan.geometry, plan.poses) : null), [plan]);
  const stale = plan && (String(plan.count) !== count || String(plan.seed) !== seed);

  return (
    <div className="flex flex-col gap-3" data-pose-plan data-hydrated={hydrated ? 'true' : undefined}>
      <form onSubmit={make} className="flex flex-wrap items-end gap-3">
        <label className="field">
          <span>Poses (6–500)</span>
          <input className="input num w-28" inputMode="numeric" value={count} onChange={(e) => setCount(e.target.value)} name="count" />
        </label>
        <label className="field">
          <span>Seed</span>
          <input className="input num w-24" inputMode="numeric" value={seed} onChange={(e) => setSeed(e.target.value)} name="seed" />
        </label>
        <button className="btn" type="submit" disabled={busy || !hydrated}>
          {busy ? 'Planning…' : 'Make plan'}
        </button>
        {plan && !stale && (
          <a className="btn btn-quiet" href={csvHref} download data-plan-download>
            Download CSV
          </a>
        )}
      </form>
      {error && (
        <div className="notice notice-error" role="alert">
          <p>{error.error}</p>
          <ul className="list-disc pl-6 text-sm">
            {error.errors.map((p, i) => (
              <li key={i}>
                {p.field ? `${p.field}: ` : ''}
                {p.message}
              </li>
            ))}
          </ul>
        </div>
      )}
      {plan && (
        <div className="flex flex-col gap-2" data-plan-quality>
          <p className="text-sm text-ink-soft">
            {plan.count} poses for the {plan.source.kind === 'parameter_set' ? `current parameter set v${plan.source.version}` : `nominal geometry r${plan.source.revision}`}, seed {plan.seed}.
            {stale && ' The fields changed since; make the plan again to download.'}
          </p>
          <table className="data-table max-w-xl">
            <thead>
              <tr>
                <th>Figure</th>
                <th className="num">Value</th>
              </tr>
            </thead>
            <tbody>
              <tr><td>Observability index O1</td><td className="num">{sig(plan.quality.O1)}</td></tr>
              <tr><td>Observability index O3 (smallest singular value)</td><td className="num">{sig(plan.quality.O3)}</td></tr>
              <tr><td>Condition number</td><td className="num">{sig(plan.quality.conditionNumber)}</td></tr>
              <tr><td>Identifiable parameters</td><td className="num">{plan.quality.identifiable} of {plan.quality.parameterCount}</td></tr>
            </tbody>
          </table>
          {plan.quality.warnings.length > 0 ? (
            <ul className="notice notice-attention list-none text-sm">
              {plan.quality.warnings.map((w, i) => <li key={i}>▲ {w}</li>)}
            </ul>
          ) : (
            <p className="text-sm">✓ No warnings for this plan.</p>
          )}
        </div>
      )}
      {view3d && <ArmView3D key={`${plan!.count}-${plan!.seed}`} {...view3d} title="The planned poses in 3-D" />}
    </div>
  );
}
