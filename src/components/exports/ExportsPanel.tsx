import { useEffect, useMemo, useRef, useState } from 'react';
import { api } from '../../lib/shared/api-client';
import { EXPORT_PICKER_PAGE, type ExportableSerials, type ExportableUnitsPage } from '../../lib/shared/export-view';
import { useFocusWhen } from '../../lib/shared/focus';
import ExportLog, { type LogPage } from './ExportLog';

/** Wait this long after the last key before searching. */
const SEARCH_DELAY_MS = 250;

/**
 * Pick units with a current set; download one unit's files or a batch zip. Quality staff see the log only.
 * The units come a page at a time from the server (the search runs there too), so the page stays small at
 * fleet size; the picked serials are kept here across pages and searches.
 */
export default function ExportsPanel({ initialUnits, initialLog, canExport }: { initialUnits?: ExportableUnitsPage; initialLog: LogPage; canExport: boolean }) {
  const [filter, setFilter] = useState('');
  const [list, setList] = useState<ExportableUnitsPage | undefined>(initialUnits);
  const [listError, setListError] = useState<string | null>(null);
  const [loading, setLoading] = useState(false);
  const [picked, setPicked] = useState<string[]>([]);
  const pickedSet = useMemo(() => new Set(picked), [picked]);
  const [status, setStatus] = useState<{ kind: 'ok' | 'error'; text: string } | null>(null);
  const [busy, setBusy] = useState(false);
  const [logKey, setLogKey] = useState(0);
  // The download's outcome (or its error) takes focus, so it is read out.
  const statusRef = useFocusWhen<HTMLParagraphElement>(status);
  // Until the island hydrates a tick would be lost (the server-rendered box has no handler): stay disabled.
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  // Only the latest request's answer is shown (an earlier search may answer after a later one).
  const asked = useRef(0);
  async function load(q: string, page: number) {
    const ticket = ++asked.current;
    setLoading(true);
    const r = await api<ExportableUnitsPage>(`/api/exports/units?${new URLSearchParams({ q, page: String(page), pageSize: String(EXPORT_PICKER_PAGE) })}`);
    if (ticket !== asked.current) return;
    setLoading(false);
    if (r.error) setListError(r.error.error);
    else {
      setListError(null);
      setList(r.data);
    }
  }
  const typed = useRef(false);
  useEffect(() => {
    if (!typed.current) return;
    const t = setTimeout(() => void load(filter.trim(), 1), SEARCH_DELAY_MS);
    return () => clearTimeout(t);
    // eslint-disable-next-line react-hooks/exhaustive-deps
  }, [filter]);
  const toggle = (s: string) => setPicked(pickedSet.has(s) ? picked.filter((x) => x !== s) : [...picked, s]);
  async function pickAllMatching() {
    const r = await api<ExportableSerials>(`/api/exports/units/serials?${new URLSearchParams({ q: list?.q ?? '' })}`);
    if (r.error) {
      setListError(r.error.error);
      return;
    }
    const added = r.data.serials.filter((s) => !pickedSet.has(s));
    const all = [...picked, ...added].slice(0, r.data.limit);
    setPicked(all);
    setStatus({
      kind: 'ok',
      text: `✓ ${added.length} unit${added.length === 1 ? '' : 's'} added; ${all.length} picked.${r.data.more || all.length < picked.length + added.length ? ` A batch holds at most ${r.data.limit} units.` : ''}`,
    });
  }
  const pages = list ? Math.max(1, Math.ceil(list.total / list.pageSize)) : 1;
  // Past 1 000 matches the count stops ("more than"): there is a next page while this one is full.
  const hasNext = !!list && (list.totalIsLowerBound ? list.items.length === list.pageSize : list.page < pages);

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
            <span>Filter (serial number, arm model, site, cell)</span>
            <input className="input" name="filter" disabled={!hydrated} value={filter} onChange={(e) => { typed.current = true; setFilter(e.target.value); }} />
          </label>
          {listError && <p className="notice notice-error" role="alert">✕ {listError}</p>}
          <div className="overflow-x-auto" aria-busy={loading}>
            <table className="data-table" data-export-units>
              <thead><tr><th>Pick</th><th>Unit</th><th>Arm model</th><th>Site</th><th className="num">Version</th><th>Approved (UTC)</th><th>One unit's files</th></tr></thead>
              <tbody>
                {list && list.items.length === 0 && <tr><td colSpan={7} className="text-ink-soft">{list.q ? 'No unit matches.' : 'No unit has an approved parameter set yet.'}</td></tr>}
                {list?.items.map((u) => (
                  <tr key={u.serial} data-export-unit={u.serial}>
                    <td><input type="checkbox" className="h-6 w-6" aria-label={`Pick ${u.serial}`} checked={pickedSet.has(u.serial)} disabled={!hydrated} onChange={() => toggle(u.serial)} /></td>
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
          {list && (
            <div className="flex flex-wrap items-center gap-3" data-export-pager>
              <button type="button" className="btn btn-quiet" disabled={!hydrated || list.page <= 1} onClick={() => load(list.q, list.page - 1)}>Previous</button>
              <span className="text-sm">
                Page {list.page} of {pages}{list.totalIsLowerBound ? '+' : ''} · {list.totalIsLowerBound ? 'more than ' : ''}{list.total} unit{list.total === 1 ? '' : 's'}{list.q ? ` matching “${list.q}”` : ' with an approved set'}
              </span>
              <button type="button" className="btn btn-quiet" disabled={!hydrated || !hasNext} onClick={() => load(list.q, list.page + 1)}>Next</button>
              {list.total > 0 && (
                <button type="button" className="btn btn-quiet" disabled={!hydrated} onClick={pickAllMatching}>
                  {list.totalIsLowerBound ? 'Pick all units' : `Pick all ${list.total} unit${list.total === 1 ? '' : 's'}`}{list.q ? ' that match' : ''}
                </button>
              )}
            </div>
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
