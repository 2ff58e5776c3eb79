import { useEffect, useState } from 'react';
import { api } from '../../lib/shared/api-client';
import type { FitPoseRow } from '../../lib/shared/fit-view';
import { mm } from './format';

const PAGE_SIZE = 100;

interface Props {
  fitId: string;
  /** Poses in the fit (all of them, not only the ones the charts draw). */
  total: number;
  /** Only the residual per axis after calibration (the axes chart's numbers). */
  axes?: boolean;
}

/** Every pose's numbers, a page at a time from /api/fits/{id}/poses (the page itself carries only a sample). */
export default function PosePages({ fitId, total, axes }: Props) {
  const [page, setPage] = useState(1);
  const [order, setOrder] = useState<'file' | 'largest'>('file');
  const [rows, setRows] = useState<FitPoseRow[] | null>(null);
  const [failed, setFailed] = useState<string | null>(null);
  const pages = Math.max(1, Math.ceil(total / PAGE_SIZE));
  useEffect(() => {
    let stop = false;
    setFailed(null);
    api<{ poses: FitPoseRow[] }>(`/api/fits/${fitId}/poses?page=${page}&pageSize=${PAGE_SIZE}&order=${order}`).then((res) => {
      if (stop) return;
      if (res.data) setRows(res.data.poses);
      else setFailed(res.error?.error ?? 'The poses could not be loaded.');
    });
    return () => {
      stop = true;
    };
  }, [fitId, page, order]);
  return (
    <div data-pose-pages>
      <div className="mb-2 flex flex-wrap items-center gap-2 text-sm">
        <label className="flex items-center gap-2">
          <span>Order</span>
          <select className="input" value={order} onChange={(e) => { setOrder(e.target.value as 'file' | 'largest'); setPage(1); }}>
            <option value="file">as in the file</option>
            <option value="largest">largest residual after first</option>
          </select>
        </label>
        <button type="button" className="btn btn-quiet" disabled={page <= 1} onClick={() => setPage(page - 1)}>← Previous</button>
        <span role="status">Page {page} of {pages} ({total} poses)</span>
        <button type="button" className="btn btn-quiet" disabled={page >= pages} onClick={() => setPage(page + 1)}>Next →</button>
      </div>
      {failed && <p className="notice notice-error" role="alert">✕ {failed}</p>}
      {rows && (
        <table className="data-table">
          <thead>
            {axes ? (
              <tr><th>Pose</th><th className="num">dx (mm)</th><th className="num">dy (mm)</th><th className="num">dz (mm)</th></tr>
            ) : (
              <tr><th>Pose</th><th className="num">Order</th><th>Role</th><th className="num">Before (mm)</th><th className="num">After (mm)</th><th className="num">dx (mm)</th><th className="num">dy (mm)</th><th className="num">dz (mm)</th><th className="num">Standardised</th></tr>
            )}
          </thead>
          <tbody>
            {rows.map((p) =>
              axes ? (
                <tr key={p.order}><td>{p.label}</td><td className="num">{mm(p.after[0])}</td><td className="num">{mm(p.after[1])}</td><td className="num">{mm(p.after[2])}</td></tr>
              ) : (
                <tr key={p.order}>
                  <td>{p.label}</td><td className="num">{p.order}</td><td>{p.role}</td><td className="num">{mm(p.errorBefore)}</td><td className="num">{mm(p.errorAfter)}</td>
                  <td className="num">{mm(p.after[0])}</td><td className="num">{mm(p.after[1])}</td><td className="num">{mm(p.after[2])}</td><td className="num">{p.standardised === null ? '—' : p.standardised.toFixed(2)}</td>
                </tr>
              ),
            )}
          </tbody>
        </table>
      )}
    </div>
  );
}
