import { useEffect, useState } from 'react';
import { api } from '../../lib/shared/api-client';
import { fmt } from '../fleet/format';

export interface AlertView {
  id: string;
  serial: string;
  modelName: string;
  version: number;
  createdAt: string;
  details: { key: string; change: number; tolerance: number | null; unit: string; multiple?: number | null; crossed?: string[] }[];
  acknowledgedAt: string | null;
  acknowledgeComment: string | null;
  acknowledgedByName: string | null;
}

function AlertItem({ alert, showSerial, onDone }: { alert: AlertView; showSerial: boolean; onDone: (a: AlertView, stillMarked: boolean) => void }) {
  const [comment, setComment] = useState('');
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);
  // Disabled until hydrated, so a native form submit never happens before the handler exists.
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  async function acknowledge(e: React.FormEvent) {
    e.preventDefault();
    setBusy(true);
    const r = await api<{ alert: AlertView; unitNeedsAttention: boolean }>(`/api/alerts/${alert.id}/acknowledge`, { method: 'POST', json: { comment } });
    setBusy(false);
    if (r.error) setError([r.error.error, ...r.error.errors.map((x) => x.message)].join(' '));
    else onDone(r.data.alert, r.data.unitNeedsAttention);
  }
  const open = !alert.acknowledgedAt;
  return (
    <li className={open ? 'notice notice-attention flex flex-col gap-2' : 'notice flex flex-col gap-2'} data-alert={alert.id}>
      <p>
        <strong>{open ? '▲ Open drift alert' : '✓ Acknowledged'}</strong>
        {showSerial && <> · unit <a href={`/units/${encodeURIComponent(alert.serial)}/drift`}>{alert.serial}</a> ({alert.modelName})</>}
        {' '}· v{alert.version} · {alert.createdAt.slice(0, 16).replace('T', ' ')} UTC
      </p>
      <ul className="text-sm">
        {alert.details.map((d) => (
          <li key={d.key}>{d.key}: changed by <span className="num">{fmt(d.change, d.unit, true)} {d.unit}</span> ({d.tolerance === null ? 'not checked' : `tolerance ±${d.tolerance} ${d.unit}`}{d.multiple === null || d.multiple === undefined ? '' : `; ${Math.abs(d.multiple).toFixed(1)}× its combined standard error`}) — {d.crossed ? (d.crossed.includes('standard-error') ? 'crossed the tolerance and 3 combined SE: a real change' : 'crossed the tolerance only, within 3 combined SE: possibly measurement uncertainty') : 'crossed the tolerance'}</li>
        ))}
      </ul>
      {open ? (
        <form onSubmit={acknowledge} className="flex flex-col gap-2" aria-label={`Acknowledge alert on ${alert.serial} v${alert.version}`}>
          <label className="field">
            <span>Comment (required: what was checked or done)</span>
            <textarea className="input" name="comment" required disabled={!hydrated} value={comment} onChange={(e) => setComment(e.target.value)} />
          </label>
          <button type="submit" className="btn self-start" disabled={busy || !hydrated}>Acknowledge</button>
          {error && <p className="notice notice-error" role="alert">✕ {error}</p>}
        </form>
      ) : (
        <p className="text-sm">{alert.acknowledgedByName}: “{alert.acknowledgeComment}”</p>
      )}
    </li>
  );
}

/** Drift alerts with the acknowledge form (a comment is required). */
export default function AlertList({ initial, showSerial = false, emptyText = 'No open drift alert.' }: { initial: AlertView[]; showSerial?: boolean; emptyText?: string }) {
  const [alerts, setAlerts] = useState(initial);
  const [note, setNote] = useState<string | null>(null);
  if (!alerts.length) return <p className="text-ink-soft">● {emptyText}</p>;
  return (
    <div className="flex flex-col gap-2">
      <ul className="flex flex-col gap-3">
        {alerts.map((a) => (
          <AlertItem
            key={a.id}
            alert={a}
            showSerial={showSerial}
            onDone={(done, stillMarked) => {
              setAlerts(alerts.map((x) => (x.id === done.id ? { ...x, ...done } : x)));
              setNote(stillMarked ? `Unit ${done.serial} still has an open alert.` : `Unit ${done.serial} is no longer marked for attention.`);
            }}
          />
        ))}
      </ul>
      {note && <p role="status" className="text-sm">{note}</p>}
    </div>
  );
}
