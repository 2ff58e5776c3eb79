import { flexRender, getCoreRowModel, useReactTable, type ColumnDef, type PaginationState, type SortingState } from '@tanstack/react-table';
import { useEffect, useMemo, useRef, useState } from 'react';
import { api } from '../../lib/shared/api-client';
import type { UnitRow, UnitsPage } from '../../lib/shared/unit-list';

export interface UnitsTableProps {
  initial: UnitsPage;
  initialQuery: { sort: string; dir: 'asc' | 'desc'; q: string; model: string };
  models: { id: string; name: string }[];
}

const PAGE_SIZES = [10, 25, 50, 100];

/**
 * The unit list: sorting, filtering and paging all happen on the server (/api/units); the table only
 * holds the state and shows one page. The state is mirrored in the address so a view can be shared.
 */
export default function UnitsTable({ initial, initialQuery, models }: UnitsTableProps) {
  // Set once React has taken over, so nothing submits natively before that (and tests can wait for it).
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const [data, setData] = useState(initial);
  const [sorting, setSorting] = useState<SortingState>([{ id: initialQuery.sort, desc: initialQuery.dir === 'desc' }]);
  const [pagination, setPagination] = useState<PaginationState>({ pageIndex: initial.page - 1, pageSize: initial.pageSize });
  const [search, setSearch] = useState(initialQuery.q);
  const [query, setQuery] = useState(initialQuery.q);
  const [model, setModel] = useState(initialQuery.model);
  const [error, setError] = useState('');
  const [loading, setLoading] = useState(false);
  const first = useRef(true);

  // Typing settles for a moment before the server is asked.
  useEffect(() => {
    const t = setTimeout(() => {
      if (search !== query) {
        setQuery(search);
        setPagination((p) => ({ ...p, pageIndex: 0 }));
      }
    }, 250);
    return () => clearTimeout(t);
  }, [search, query]);

  useEffect(() => {
    if (first.current) {
      first.current = false;
      return;
    }
    const params = new URLSearchParams({ page: String(pagination.pageIndex + 1), pageSize: String(pagination.pageSize) });
    const s = sorting[0];
    if (s) {
      params.set('sort', s.id);
      params.set('dir', s.desc ? 'desc' : 'asc');
    }
    if (query.trim()) params.set('q', query.trim());
    if (model) params.set('model', model);
    let cancelled = false;
    setLoading(true);
    api<UnitsPage>(`/api/units?${params}`).then((r) => {
      if (cancelled) return;
      setLoading(false);
      if (r.error) return setError([r.error.error, ...r.error.errors.map((e) => `${e.field ?? ''} ${e.message}`)].join(' '));
      setError('');
      setData(r.data);
      history.replaceState(null, '', `/units?${params}`);
    });
    return () => {
      cancelled = true;
    };
  }, [sorting, pagination, query, model]);

  const columns = useMemo<ColumnDef<UnitRow>[]>(
    () => [
      {
        id: 'serial',
        header: 'Serial number',
        accessorKey: 'serial',
        cell: (c) => (
          <a href={`/units/${encodeURIComponent(c.row.original.serial)}`} className="font-semibold">
            {c.row.original.serial}
          </a>
        ),
      },
      { id: 'model', header: 'Arm model', accessorKey: 'model' },
      { id: 'revision', header: 'Revision', accessorKey: 'revision', cell: (c) => `r${c.row.original.revision}`, meta: { num: true } },
      { id: 'site', header: 'Site', accessorKey: 'site', cell: (c) => c.row.original.site || '—' },
      { id: 'cell', header: 'Cell', accessorKey: 'cell', cell: (c) => c.row.original.cell || '—' },
      { id: 'commissionedOn', header: 'Commissioned', accessorKey: 'commissionedOn', cell: (c) => c.row.original.commissionedOn ?? '—', meta: { num: true } },
      {
        id: 'attention',
        header: 'State',
        enableSorting: false,
        cell: (c) => (c.row.original.needsAttention ? <span className="badge text-attention">▲ needs attention</span> : <span className="text-ink-soft">● in service</span>),
      },
    ],
    [],
  );

  const table = useReactTable({
    data: data.items,
    columns,
    getCoreRowModel: getCoreRowModel(),
    manualSorting: true,
    manualPagination: true,
    manualFiltering: true,
    enableMultiSort: false,
    sortDescFirst: false,
    rowCount: data.total,
    state: { sorting, pagination },
    onSortingChange: (u) => {
      setSorting(u);
      setPagination((p) => ({ ...p, pageIndex: 0 }));
    },
    onPaginationChange: setPagination,
  });

  const from = data.total === 0 ? 0 : (data.page - 1) * data.pageSize + 1;
  const to = Math.min(data.total, data.page * data.pageSize);

  return (
    <div className="flex flex-col gap-3" data-units-table data-hydrated={hydrated ? 'true' : undefined}>
      <div className="flex flex-wrap items-end gap-3">
        <label className="field min-w-60 flex-1">
          <span>Search serial number, site, cell or model</span>
          <input className="input" type="search" value={search} onChange={(e) => setSearch(e.target.value)} placeholder="e.g. R6 or Plant North" data-units-search />
        </label>
        <label className="field">
          <span>Arm model</span>
          <select
            className="input"
            value={model}
            onChange={(e) => {
              setModel(e.target.value);
              setPagination((p) => ({ ...p, pageIndex: 0 }));
            }}
            data-units-model
          >
            <option value="">All models</option>
            {models.map((m) => (
              <option key={m.id} value={m.id}>
                {m.name}
              </option>
            ))}
          </select>
        </label>
      </div>
      {error && (
        <p className="notice notice-error" role="alert">
          {error}
        </p>
      )}
      <div className="card overflow-x-auto p-0" aria-busy={loading}>
        <table className="data-table">
          <thead>
            {table.getHeaderGroups().map((hg) => (
              <tr key={hg.id}>
                {hg.headers.map((h) => {
                  const sorted = h.column.getIsSorted();
                  const num = (h.column.columnDef.meta as { num?: boolean } | undefined)?.num;
                  return (
                    <th key={h.id} className={num ? 'num' : undefined} aria-sort={sorted === 'asc' ? 'ascending' : sorted === 'desc' ? 'descending' : undefined}>
                      {h.column.getCanSort() ? (
                        <button type="button" className="inline-flex min-h-11 items-center gap-1 font-semibold" onClick={h.column.getToggleSortingHandler()} data-sort={h.column.id}>
                          {flexRender(h.column.columnDef.header, h.getContext())}
                          <span aria-hidden="true">{sorted === 'asc' ? '▲' : sorted === 'desc' ? '▼' : '↕'}</span>
                          <span className="sr-only">{sorted ? (sorted === 'asc' ? 'sorted ascending' : 'sorted descending') : 'sort'}</span>
                        </button>
                      ) : (
                        flexRender(h.column.columnDef.header, h.getContext())
                      )}
                    </th>
                  );
                })}
              </tr>
            ))}
          </thead>
          <tbody>
            {table.getRowModel().rows.map((r) => (
              <tr key={r.id} data-unit-row={r.original.serial}>
                {r.getVisibleCells().map((c) => (
                  <td key={c.id} className={(c.column.columnDef.meta as { num?: boolean } | undefined)?.num ? 'num' : undefined}>
                    {flexRender(c.column.columnDef.cell, c.getContext())}
                  </td>
                ))}
              </tr>
            ))}
            {data.items.length === 0 && (
              <tr>
                <td colSpan={columns.length} className="text-ink-soft">
                  No units match.
                </td>
              </tr>
            )}
          </tbody>
        </table>
      </div>
      <div className="flex flex-wrap items-center gap-3">
        <span className="text-sm" data-units-count>
          {from}–{to} of {data.total}
        </span>
        <button type="button" className="btn btn-quiet" disabled={!table.getCanPreviousPage()} onClick={() => table.previousPage()}>
          ← Previous
        </button>
        <span className="text-sm">
          Page {pagination.pageIndex + 1} of {Math.max(1, table.getPageCount())}
        </span>
        <button type="button" className="btn btn-quiet" disabled={!table.getCanNextPage()} onClick={() => table.nextPage()} data-next-page>
          Next →
        </button>
        <label className="ml-auto flex items-center gap-2 text-sm">
          Rows per page
          <select className="input" value={pagination.pageSize} onChange={(e) => table.setPageSize(Number(e.target.value))}>
            {PAGE_SIZES.map((n) => (
              <option key={n} value={n}>
                {n}
              </option>
            ))}
          </select>
        </label>
      </div>
    </div>
  );
}
