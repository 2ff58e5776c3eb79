import { useEffect, useState } from 'react';
import { Bar, BarChart, CartesianGrid, Legend, ResponsiveContainer, Tooltip, XAxis, YAxis } from 'recharts';
import { api } from '../../lib/shared/api-client';
import { ACCENT } from '../chart-colours';
import SafetyNotice from '../SafetyNotice';

interface Summary {
  kind: 'cartesian' | 'joint';
  counts: Record<string, number>;
  maxCorrectionMm: number;
  rmsCorrectionMm: number;
  histogram: { edges: number[]; counts: number[] };
  largest: { target: string; line: number; correctionMm: number; rotationDeg: number; status: string }[];
  notReached: { target: string; line: number; status: string; message: string }[];
  milliseconds: number;
}
export interface Compensation {
  id: string; serial: string; parameterSetVersion: number; state: 'queued' | 'running' | 'done' | 'failed'; frame: string;
  targetCount: number; input: { name: string; sha256: string; bytes: number }; output: { sha256: string; bytes: number } | null;
  progress: { done: number; total: number } | null; error: string | null; createdBy: string; createdAt: string; finishedAt: string | null;
  summary?: Summary | null;
}

/** Status words with a shape, so colour is never the only carrier. */
export const STATUS_WORDS: Record<string, { icon: string; word: string; tone: string }> = {
  reached: { icon: '✓', word: 'reached', tone: 'text-accent' },
  singular: { icon: '▲', word: 'near a singularity', tone: 'text-attention' },
  jump: { icon: '▲', word: 'configuration jump', tone: 'text-attention' },
  'outside-limits': { icon: '✕', word: 'outside joint limits', tone: 'text-error' },
  unreachable: { icon: '✕', word: 'unreachable', tone: 'text-error' },
};
const ORDER = ['reached', 'singular', 'jump', 'outside-limits', 'unreachable'];
const mm = (v: number) => v.toFixed(3);

/** One compensation: progress while the job runs, then statuses, correction sizes and the download. */
export default function CompensationView({ initial, canDownload = true }: { initial: Compensation; canDownload?: boolean }) {
  const [c, setC] = useState<Compensation>(initial);
  const [read, setRead] = useState(false);
  useEffect(() => {
    if (c.state === 'done' || c.state === 'failed') return;
    const t = setTimeout(async () => {
      const r = await api<Compensation>(`/api/compensations/${c.id}`);
      if (r.data) setC(r.data);
      else setC({ ...c });
    }, 1000);
    return () => clearTimeout(t);
  }, [c]);

  if (c.state === 'queued' || c.state === 'running') {
    return (
      <div role="status" aria-live="polite" className="flex flex-col gap-2" data-compensation-state={c.state}>
        <p>◌ {c.state === 'queued' ? 'Waiting for a worker…' : `Compensating: ${c.progress?.done ?? 0} of ${c.targetCount} targets`}</p>
        <progress className="h-3 w-full" max={c.targetCount || 1} value={c.progress?.done ?? 0} />
      </div>
    );
  }
  if (c.state === 'failed') return <p className="notice notice-error" role="alert" data-compensation-state="failed">✕ {c.error}</p>;
  const s = c.summary!;
  const bins = s.histogram.counts.map((n, k) => ({ bin: `${mm(s.histogram.edges[k])}–${mm(s.histogram.edges[k + 1])}`, targets: n }));
  return (
    <div className="flex flex-col gap-6" data-compensation-state="done">
      <p className="text-sm text-ink-soft">Finished {c.finishedAt ? new Date(c.finishedAt).toISOString().slice(0, 16).replace('T', ' ') + ' UTC' : ''}; {c.targetCount} targets compensated in {(s.milliseconds / 1000).toFixed(2)} s.</p>
      <section>
        <h2 className="mb-2">Targets by status</h2>
        <ul className="flex flex-wrap gap-x-6 gap-y-2" data-status-counts>
          {ORDER.map((k) => (
            <li key={k} className={STATUS_WORDS[k].tone} data-status={k}><span aria-hidden="true">{STATUS_WORDS[k].icon}</span> {s.counts[k] ?? 0} {STATUS_WORDS[k].word}</li>
          ))}
        </ul>
        <details className="mt-2 text-sm text-ink-soft">
          <summary>How each status is decided</summary>
          <ul className="ml-5 list-disc">
            <li>Reached: the calibrated arm's tool frame is within 1e-9 mm and 1e-9° of the target.</li>
            <li>Near a singularity: reached, but the smallest singular value of the joint Jacobian (rows divided by the arm's length scale) is below 0.002; the joint values are ill-determined there. Measured on seeded simulations (tests/engine/ik-flags.test.ts): no false alarms and no misses against an independent SVD.</li>
            <li>Configuration jump: reached, but a joint moves more than 90° (prismatic: 200 mm) from the previous target's solution, beyond what the program's own hints move (reported before a singularity when both hold).</li>
            <li>Outside joint limits: reachable only with a joint beyond its limit; the closest configuration within the limits is written.</li>
            <li>Unreachable: no configuration found brings the tool onto the target; the remaining distance is given.</li>
          </ul>
        </details>
      </section>
      <section>
        <h2 className="mb-1">Size of the corrections</h2>
        <p className="mb-2 text-sm text-ink-soft">Distance between each compensated target and the original (targets reached or flagged, not unreachable or outside limits): RMS {mm(s.rmsCorrectionMm)} mm, largest {mm(s.maxCorrectionMm)} mm.</p>
        <div className="h-64 w-full" data-correction-histogram>
          <ResponsiveContainer width="100%" height="100%">
            <BarChart data={bins} margin={{ top: 8, right: 16, bottom: 36, left: 16 }}>
              <CartesianGrid strokeDasharray="3 3" />
              <XAxis dataKey="bin" tick={{ fontSize: 11 }} interval="preserveStartEnd" label={{ value: 'correction (mm)', position: 'insideBottom', offset: -24 }} />
              <YAxis allowDecimals={false} label={{ value: 'targets', angle: -90, position: 'insideLeft', offset: -4 }} width={56} />
              <Tooltip />
              <Legend verticalAlign="top" height={28} />
              <Bar dataKey="targets" name="Targets per correction size" fill={ACCENT} isAnimationActive={false} />
            </BarChart>
          </ResponsiveContainer>
        </div>
        <details className="mt-2">
          <summary className="cursor-pointer">The numbers behind the chart</summary>
          <table className="data-table mt-2"><thead><tr><th>Correction (mm)</th><th className="num">Targets</th></tr></thead>
            <tbody>{bins.map((b) => <tr key={b.bin}><td>{b.bin}</td><td className="num">{b.targets}</td></tr>)}</tbody></table>
        </details>
      </section>
      <section>
        <h2 className="mb-2">Largest corrections first{s.largest.length < c.targetCount ? ` (the ${s.largest.length} largest)` : ''}</h2>
        <div className="max-h-96 overflow-auto">
          <table className="data-table" data-largest>
            <thead><tr><th>Target</th><th className="num">Line</th><th className="num">Correction (mm)</th><th className="num">Rotation (deg)</th><th>Status</th></tr></thead>
            <tbody>
              {s.largest.map((t) => (
                <tr key={`${t.line}`}><td className="break-all">{t.target}</td><td className="num">{t.line}</td><td className="num">{mm(t.correctionMm)}</td><td className="num">{t.rotationDeg.toFixed(4)}</td><td className={STATUS_WORDS[t.status]?.tone}>{STATUS_WORDS[t.status]?.icon} {STATUS_WORDS[t.status]?.word ?? t.status}</td></tr>
              ))}
            </tbody>
          </table>
        </div>
      </section>
      {s.notReached.length > 0 && (
        <section>
          <h2 className="mb-2">Targets to look at ({(s.counts.singular ?? 0) + (s.counts.jump ?? 0) + (s.counts['outside-limits'] ?? 0) + (s.counts.unreachable ?? 0)})</h2>
          <div className="max-h-96 overflow-auto">
            <table className="data-table" data-not-reached>
              <thead><tr><th>Target</th><th className="num">Line</th><th>Status</th><th>What it means</th></tr></thead>
              <tbody>{s.notReached.map((t) => <tr key={t.line}><td className="break-all">{t.target}</td><td className="num">{t.line}</td><td className={STATUS_WORDS[t.status]?.tone}>{STATUS_WORDS[t.status]?.icon} {STATUS_WORDS[t.status]?.word}</td><td>{t.message}</td></tr>)}</tbody>
            </table>
          </div>
        </section>
      )}
      {canDownload && <section className="flex flex-col gap-3">
        <h2>Download</h2>
        <SafetyNotice />
        <p className="text-sm">A compensated program moves the arm to new positions. Run it first with safeguards active and at reduced speed, confirm positions against known references, and keep the original program ready to restore.</p>
        <label className="flex min-h-11 items-center gap-3">
          <input type="checkbox" className="h-6 w-6" checked={read} onChange={(e) => setRead(e.target.checked)} data-caution-read />
          <span>I have read the safety caution.</span>
        </label>
        <div className="flex flex-wrap items-center gap-3">
          {read ? (
            <a className="btn" href={`/api/compensations/${c.id}/file?part=output`} download data-download>Download the compensated program (CSV)</a>
          ) : (
            <button className="btn" type="button" disabled>Download the compensated program (CSV)</button>
          )}
          <a className="btn btn-quiet" href={`/api/compensations/${c.id}/file?part=input`} download>Original program</a>
        </div>
      </section>}
      <p className="break-all text-sm text-ink-soft">SHA-256 of the compensated program: <code data-output-sha>{c.output?.sha256}</code> · of the original: <code>{c.input.sha256}</code></p>
    </div>
  );
}
