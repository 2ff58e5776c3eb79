import { useState } from 'react';
import { api } from '../../lib/shared/api-client';

export interface WebhookEndpointView { id: string; url: string; events: string[]; description: string; active: boolean; createdAt: string; removedAt: string | null }
export interface WebhookDeliveryView {
  id: string; endpointId: string; url: string; event: string; state: 'pending' | 'delivered' | 'failed';
  attempts: number; lastStatus: number | null; lastError: string | null; createdAt: string; lastAttemptAt: string | null; deliveredAt: string | null;
}

const EVENT_LABELS: Record<string, string> = {
  'parameter_set.approved': 'Parameter set approved',
  'drift_alert.raised': 'Drift alert raised',
  'fit.finished': 'Fit finished (fitted or failed)',
};
const STATE_MARK = { pending: '◌ waiting / retrying', delivered: '● delivered', failed: '✕ given up' } as const;
const when = (s: string | null) => (s ? new Date(s).toISOString().replace('T', ' ').slice(0, 19) + ' UTC' : '—');

/** Register and remove webhook endpoints; the delivery log below shows every attempt's outcome. */
export default function WebhooksAdmin({ initial, deliveries: firstDeliveries, events }: { initial: WebhookEndpointView[]; deliveries: WebhookDeliveryView[]; events: string[] }) {
  const [endpoints, setEndpoints] = useState(initial);
  const [deliveries, setDeliveries] = useState(firstDeliveries);
  const [secret, setSecret] = useState<string | null>(null);
  const [problems, setProblems] = useState<string[]>([]);

  const refresh = async () => {
    const [e, d] = await Promise.all([
      api<{ endpoints: WebhookEndpointView[] }>('/api/admin/webhooks'),
      api<{ deliveries: WebhookDeliveryView[] }>('/api/admin/webhooks/deliveries?pageSize=50'),
    ]);
    if (e.data) setEndpoints(e.data.endpoints);
    if (d.data) setDeliveries(d.data.deliveries);
  };

  async function register(ev: React.FormEvent<HTMLFormElement>) {
    ev.preventDefault();
    const form = ev.currentTarget;
    const data = new FormData(form);
    const body = { url: String(data.get('url') ?? ''), events: data.getAll('events').map(String), description: String(data.get('description') ?? '') };
    const r = await api<{ secret: string }>('/api/admin/webhooks', { method: 'POST', json: body });
    if (r.error) return setProblems([r.error.error, ...r.error.errors.map((p) => `${p.field ?? ''}: ${p.message}`)]);
    setProblems([]);
    setSecret(r.data.secret);
    form.reset();
    await refresh();
  }

  async function remove(id: string) {
    const r = await api(`/api/admin/webhooks/${id}`, { method: 'DELETE' });
    if (r.error) setProblems([r.error.error]);
    await refresh();
  }

  return (
    <div className="flex flex-col gap-6">
      <section className="card">
        <h2 className="mb-2">Register an endpoint</h2>
        <form onSubmit={register} className="flex flex-col gap-3" data-webhook-form>
          <label className="field"><span>Receiver URL (https:// recommended)</span><input className="input" name="url" type="url" required placeholder="https://deploy.example.internal/offsetry" /></label>
          <fieldset className="flex flex-wrap gap-4">
            <legend className="mb-1 text-sm">Events</legend>
            {events.map((e) => (
              <label key={e} className="flex items-center gap-2"><input type="checkbox" name="events" value={e} defaultChecked={e === 'parameter_set.approved'} />{EVENT_LABELS[e] ?? e}</label>
            ))}
          </fieldset>
          <label className="field"><span>Description</span><input className="input" name="description" maxLength={200} placeholder="e.g. controller deployment pipeline" /></label>
          <div><button className="btn" type="submit">Register endpoint</button></div>
        </form>
        {secret && (
          <p className="notice mt-3" role="status">
            Signing secret (shown once; store it with the receiver): <code data-webhook-secret className="break-all font-mono">{secret}</code>
          </p>
        )}
        {problems.length > 0 && <ul className="notice notice-error mt-3" role="alert">{problems.map((p) => <li key={p}>{p}</li>)}</ul>}
      </section>

      <section className="card overflow-x-auto">
        <h2 className="mb-2">Endpoints</h2>
        {endpoints.length === 0 ? <p>No endpoints registered.</p> : (
          <>
          <ul className="flex flex-col gap-3 md:hidden">
            {endpoints.map((e) => (
              <li key={e.id} className="border-b border-rule pb-3">
                <div className="break-all font-mono text-sm">{e.url}</div>
                <div className="text-sm">{e.events.join(', ')}{e.description ? ` · ${e.description}` : ''}</div>
                <div className="flex items-center justify-between gap-2 text-sm text-ink-soft">
                  <span>{e.active ? '● active' : `✕ removed ${when(e.removedAt)}`}</span>
                  {e.active && <button className="btn btn-quiet" type="button" onClick={() => remove(e.id)}>Remove</button>}
                </div>
              </li>
            ))}
          </ul>
          <table className="data-table hidden md:table" data-webhook-endpoints>
            <thead><tr><th>URL</th><th>Events</th><th>Description</th><th>Registered</th><th>Status</th><th /></tr></thead>
            <tbody>
              {endpoints.map((e) => (
                <tr key={e.id}>
                  <td className="break-all font-mono text-sm">{e.url}</td>
                  <td>{e.events.join(', ')}</td>
                  <td>{e.description || '—'}</td>
                  <td className="num">{when(e.createdAt)}</td>
                  <td>{e.active ? '● active' : `✕ removed ${when(e.removedAt)}`}</td>
                  <td>{e.active && <button className="btn btn-quiet" type="button" onClick={() => remove(e.id)}>Remove</button>}</td>
                </tr>
              ))}
            </tbody>
          </table>
          </>
        )}
      </section>

      <section className="card overflow-x-auto">
        <div className="mb-2 flex flex-wrap items-center justify-between gap-2">
          <h2>Delivery log</h2>
          <button className="btn btn-quiet" type="button" onClick={refresh}>Refresh</button>
        </div>
        <p className="mb-2 text-sm text-ink-soft">A delivery counts as delivered when the receiver answers 2xx within the time limit; otherwise it is retried with growing pauses, then given up. Removing an endpoint closes what is still waiting for it.</p>
        {deliveries.length === 0 ? <p>No deliveries yet.</p> : (
          <>
          <ul className="flex flex-col gap-3 md:hidden">
            {deliveries.map((d) => (
              <li key={d.id} className="border-b border-rule pb-3 text-sm" data-state={d.state}>
                <div className="font-semibold">{d.event} · {STATE_MARK[d.state]}</div>
                <div className="break-all font-mono">{d.url}</div>
                <div className="text-ink-soft">{when(d.createdAt)} · {d.attempts} attempt{d.attempts === 1 ? '' : 's'} · {d.lastError ?? (d.lastStatus ? `HTTP ${d.lastStatus}` : '—')}</div>
              </li>
            ))}
          </ul>
          <table className="data-table hidden md:table" data-webhook-deliveries>
            <thead><tr><th>Created</th><th>Event</th><th>URL</th><th>State</th><th className="num">Attempts</th><th>Last answer</th></tr></thead>
            <tbody>
              {deliveries.map((d) => (
                <tr key={d.id} data-state={d.state}>
                  <td className="num">{when(d.createdAt)}</td>
                  <td>{d.event}</td>
                  <td className="break-all font-mono text-sm">{d.url}</td>
                  <td>{STATE_MARK[d.state]}</td>
                  <td className="num">{d.attempts}</td>
                  <td className="break-all text-sm">{d.lastError ?? (d.lastStatus ? `HTTP ${d.lastStatus}` : '—')}</td>
                </tr>
              ))}
            </tbody>
          </table>
          </>
        )}
      </section>
    </div>
  );
}
