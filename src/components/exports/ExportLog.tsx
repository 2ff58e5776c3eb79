import { useEffect, useState } from 'react';
import { api } from '../../lib/shared/api-client';

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

/** The export log, newest first, a page at a time; `refresh` changes after each export. */
export default function ExportLog({ initial, refresh }: { initial: LogPage; refresh: number }) {
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
