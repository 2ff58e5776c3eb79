import { useEffect, useMemo, useState } from 'react';
import { api } from '../../lib/shared/api-client';
import { useFocusWhen } from '../../lib/shared/focus';

export interface ExportableUnit {
  serial: string;
  site: string;
  needsAttention: boolean;
  modelName: string;
  setId: string;
  version: number;
  approvedAt: string;
}

export interface LogEntry {
  id: string;
  at: string;
  kind: 'single' | 'batch' | 'compensation';
  format: string;
  items: { serial: string; version: number; parameterSetId: string }[];
  /** All items of the entry (items lists the first ones). */
  itemCount?: number;
  userName: string;
  userEmail: string;
}

export interface LogPage {
  page: number;
  pageSize: number;
  total: number;
  entries: LogEntry[];
}

function ExportLog({ initial, refresh }: { initial: LogPage; refresh: number }) {
  const [log, setLog] = useState(initial);
  const [error, setError] = useState<string | null>(null);
  async function load(page: number) {
    const r = await api<LogPage>(`/api/exports?page=${page}&pageSize=${log.pageSize}`);
    if (r.error) setError(r.error.error);
    else setLog(r.data);
  }
  useEffect(() => {
    if (refresh > 0) void load(1);
    // eslint-disable-next-line react-hooks/exhaustive-deps
  }, [refresh]);
  const pages = Math.max(1, Math.ceil(log.total / log.pageSize));
  return (
    <section className="flex flex-col gap-2" aria-label="Export log">
      <div className="flex flex-wrap items-center gap-3">
        <h2>Export log</h2>
        <button type="button" className="btn btn-quiet" onClick={() => load(log.page)}>Refresh</button>
      </div>
      {error && <p className="notice notice-error">✕ {error}</p>}
      <div className="overflow-x-auto">
        <table className="data-table" data-export-log>
          <thead><tr><th>When (UTC)</th><th>Who</th><th>Kind</th><th>Format</th><th>Units and versions</th></tr></thead>
          <tbody>
            {log.entries.length === 0 && <tr><td colSpan={5} className="text-ink-soft">Nothing exported yet.</td></tr>}
            {log.entries.map((e) => (
              <tr key={e.id}>
                <td className="whitespace-nowrap">{e.at.slice(0, 19).replace('T', ' ')}</td>
                <td>{e.userName}<br /><span className="text-xs text-ink-soft">{e.userEmail}</span></td>
                <td>{e.kind === 'batch' ? 'batch (zip)' : e.kind === 'compensation' ? 'compensated program' : 'single file'}</td>
                <td>{e.format}</td>
                <td>{e.items.map((i) => `${i.serial} v${i.version}`).join(', ')}{(e.itemCount ?? 0) > e.items.length ? ` … and ${e.itemCount! - e.items.length} more (${e.itemCount} units)` : ''}</td>
              </tr>
            ))}
          </tbody>
        </table>
      </div>
      <div className="flex items-center gap-3">
        <button type="button" className="btn btn-quiet" disabled={log.page <= 1} onClick={() => load(log.page - 1)}>Newer</button>
        <span className="text-sm">Page {log.page} of {pages} · {log.total} exports</span>
        <button type="button" className="btn btn-quiet" disabled={log.page >= pages} onClick={() => load(log.page + 1)}>Older</button>
      </div>
    </section>
  );
}

/** Rows of the unit table at most (the filter searches every unit). */
const ROWS_SHOWN = 200;

/** Pick units with a current set; download one unit's files or a batch zip. Quality staff see the log only. */
export default function ExportsPanel({ units, initialLog, canExport }: { units: ExportableUnit[]; initialLog: LogPage; canExport: boolean }) {
  const [filter, setFilter] = useState('');
  const [picked, setPicked] = useState<string[]>([]);
  const [status, setStatus] = useState<{ kind: 'ok' | 'error'; text: string } | null>(null);
  const [busy, setBusy] = useState(false);
  const [logKey, setLogKey] = useState(0);
  // The download's outcome (or its error) takes focus, so it is read out.
  const statusRef = useFocusWhen<HTMLParagraphElement>(status);
  // Until the island hydrates a tick would be lost (the server-rendered box has no handler): stay disabled.
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const shown = useMemo(() => {
    const f = filter.trim().toLowerCase();
    return f ? units.filter((u) => `${u.serial} ${u.modelName} ${u.site}`.toLowerCase().includes(f)) : units;
  }, [filter, units]);
  // At fleet size the list is thousands of units: the table shows the first ROWS_SHOWN that match the filter.
  const visible = shown.slice(0, ROWS_SHOWN);
  const toggle = (s: string) => setPicked(picked.includes(s) ? picked.filter((x) => x !== s) : [...picked, s]);

  async function batch() {
    setBusy(true);
    setStatus(null);
    let res: Response;
    try {
      res = await fetch('/api/exports', { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ serials: picked }) });
    } catch {
      setBusy(false);
      setStatus({ kind: 'error', text: 'The server could not be reached.' });
      return;
    }
    setBusy(false);
    if (!res.ok) {
      const body = await res.json().catch(() => ({}));
      setStatus({ kind: 'error', text: [body.error ?? res.statusText, ...(body.errors ?? []).map((e: { message: string }) => e.message)].join(' ') });
      return;
    }
    const name = /filename="([^"]+)"/.exec(res.headers.get('content-disposition') ?? '')?.[1] ?? 'offsetry-export.zip';
    const url = URL.createObjectURL(await res.blob());
    const a = document.createElement('a');
    a.href = url;
    a.download = name;
    document.body.appendChild(a);
    a.click();
    a.remove();
    setTimeout(() => URL.revokeObjectURL(url), 5000);
    setStatus({ kind: 'ok', text: `✓ Downloaded ${name} with ${picked.length} unit${picked.length === 1 ? '' : 's'}. Check the checksums against manifest.json.` });
    setLogKey(logKey + 1);
  }

  return (
    <div className="flex flex-col gap-6">
      {canExport && (
        <section className="card flex flex-col gap-3" aria-label="Choose units">
          <h2>Units with an approved parameter set</h2>
          <label className="field max-w-md">
            <span>Filter (serial number, arm model, site)</span>
            <input className="input" name="filter" disabled={!hydrated} value={filter} onChange={(e) => setFilter(e.target.value)} />
          </label>
          <div className="overflow-x-auto">
            <table className="data-table">
              <thead><tr><th>Pick</th><th>Unit</th><th>Arm model</th><th>Site</th><th className="num">Version</th><th>Approved (UTC)</th><th>One unit's files</th></tr></thead>
              <tbody>
                {shown.length === 0 && <tr><td colSpan={7} className="text-ink-soft">No unit matches.</td></tr>}
                {visible.map((u) => (
                  <tr key={u.serial} data-export-unit={u.serial}>
                    <td><input type="checkbox" className="h-6 w-6" aria-label={`Pick ${u.serial}`} checked={picked.includes(u.serial)} disabled={!hydrated} onChange={() => toggle(u.serial)} /></td>
                    <td className="font-semibold">{u.serial}{u.needsAttention && <span className="badge ml-2 text-attention">▲ drift alert open</span>}</td>
                    <td>{u.modelName}</td>
                    <td>{u.site}</td>
                    <td className="num">v{u.version}</td>
                    <td>{u.approvedAt.slice(0, 16).replace('T', ' ')}</td>
                    <td className="flex flex-wrap gap-1">
                      {(['json', 'csv', 'urdf'] as const).map((f) => (
                        <a key={f} className="btn btn-quiet" href={`/api/parameter-sets/${u.setId}/export?format=${f}`} download onClick={() => setTimeout(() => setLogKey((k) => k + 1), 800)}>
                          {f === 'json' ? 'Geometry JSON' : f === 'csv' ? 'CSV' : 'URDF'}
                        </a>
                      ))}
                    </td>
                  </tr>
                ))}
              </tbody>
            </table>
          </div>
          {shown.length > visible.length && (
            <p className="text-ink-soft" data-export-more>
              Showing the first {visible.length} of {shown.length} units{filter.trim() ? ' that match' : ''}; type in the filter to narrow the list.
            </p>
          )}
          <div className="flex flex-wrap items-center gap-3">
            <button type="button" className="btn" disabled={!picked.length || busy} onClick={batch}>
              {busy ? 'Preparing…' : `Download batch (zip) of ${picked.length} unit${picked.length === 1 ? '' : 's'}`}
            </button>
            {picked.length > 0 && <button type="button" className="btn btn-quiet" onClick={() => setPicked([])}>Clear selection</button>}
          </div>
          {status && <p ref={statusRef} role={status.kind === 'ok' ? 'status' : 'alert'} data-export-status className={status.kind === 'ok' ? 'notice' : 'notice notice-error'}>{status.kind === 'error' ? '✕ ' : ''}{status.text}</p>}
        </section>
      )}
      <ExportLog refresh={logKey} initial={initialLog} />
    </div>
  );
}
