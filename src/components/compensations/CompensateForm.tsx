import { useState } from 'react';
import { useDropzone } from 'react-dropzone';
import { formatBytes } from '../../lib/shared/display';

interface Problem { line?: number; column?: string; field?: string; message: string; expected?: string }
interface Props { serial: string; jointCount: number; setVersion: number; hasBase: boolean }

type State = { kind: 'idle' } | { kind: 'sending' } | { kind: 'refused'; status: number; error: string; errors: Problem[] };

/** Drop zone for a robot program, frame and tool; posts multipart and opens the compensation's page. */
export default function CompensateForm({ serial, jointCount, setVersion, hasBase }: Props) {
  const [file, setFile] = useState<File | null>(null);
  const [state, setState] = useState<State>({ kind: 'idle' });
  const [frame, setFrame] = useState<'base' | 'measurement'>('base');
  const [tool, setTool] = useState('');
  const { getRootProps, getInputProps, isDragActive } = useDropzone({
    multiple: false,
    onDrop: (accepted) => {
      if (accepted[0]) {
        setFile(accepted[0]);
        setState({ kind: 'idle' });
      }
    },
  });
  const q = Array.from({ length: jointCount }, (_, i) => `q${i + 1}`).join(',');

  async function submit(e: React.FormEvent) {
    e.preventDefault();
    if (!file) return;
    setState({ kind: 'sending' });
    const form = new FormData();
    form.set('frame', frame);
    if (tool.trim()) form.set('tool', tool.trim());
    form.set('file', file, file.name);
    let res: Response;
    try {
      res = await fetch(`/api/units/${encodeURIComponent(serial)}/compensations`, { method: 'POST', body: form });
    } catch {
      setState({ kind: 'refused', status: 0, error: 'The server could not be reached.', errors: [] });
      return;
    }
    const body = await res.json().catch(() => ({ error: res.statusText }));
    if (res.status === 202 && body.url) location.href = body.url;
    else setState({ kind: 'refused', status: res.status, error: body.error ?? res.statusText, errors: body.errors ?? [] });
  }

  return (
    <form onSubmit={submit} className="flex flex-col gap-5" noValidate data-compensate-form>
      <div
        {...getRootProps({
          className: `flex min-h-40 cursor-pointer flex-col items-center justify-center gap-2 rounded-lg border-2 border-dashed p-6 text-center ${isDragActive ? 'border-accent bg-accent-soft' : 'border-rule bg-white'}`,
          'aria-label': 'Program file: drop a CSV here or choose one',
        })}
        data-dropzone
      >
        <input {...getInputProps()} name="file-picker" data-file-input />
        {file ? (
          <>
            <p className="font-semibold" data-chosen-file>▤ {file.name}</p>
            <p className="text-ink-soft">{formatBytes(file.size)} · drop another file or tap to replace it</p>
          </>
        ) : (
          <>
            <p className="font-semibold">Drop the program CSV here, or tap to choose it</p>
            <p className="break-words text-ink-soft">
              Header <code>target,x,y,z</code> (optional <code>rx,ry,rz</code> and <code>{q}</code> hints) or <code>target,{q}</code>.
            </p>
          </>
        )}
      </div>
      <div className="grid gap-4 md:grid-cols-2">
        <label className="field min-w-0">
          <span>Frame of the targets</span>
          <select className="input w-full min-w-0" name="frame" value={frame} onChange={(e) => setFrame(e.target.value as 'base' | 'measurement')}>
            <option value="base">Robot base frame</option>
            <option value="measurement" disabled={!hasBase}>Measurement (tracker) frame of the calibration</option>
          </select>
        </label>
        <label className="field min-w-0">
          <span>Tool centre point (optional): x,y,z[,rx,ry,rz] in mm and degrees, flange frame</span>
          <input className="input w-full min-w-0" name="tool" value={tool} onChange={(e) => setTool(e.target.value)} placeholder="the geometries' own tools" maxLength={200} inputMode="decimal" />
        </label>
      </div>
      <p className="text-sm text-ink-soft">Compensated for parameter set v{setVersion} against the arm model's nominal geometry. Programs of up to 100 000 targets run as a job; the page shows its progress.</p>
      <div className="flex flex-wrap items-center gap-3">
        <button className="btn" type="submit" disabled={!file || state.kind === 'sending'}>{state.kind === 'sending' ? 'Uploading…' : 'Compensate the program'}</button>
        {!file && <span className="text-ink-soft">Choose a file first.</span>}
      </div>
      {state.kind === 'refused' && (
        <div className="flex flex-col gap-3" data-refusal data-status={state.status}>
          <p className="notice notice-error" role="alert">✕ {state.error}</p>
          {state.errors.length > 0 && (
            <div className="overflow-x-auto">
              <table className="data-table" data-problems>
                <thead><tr><th className="num">Line</th><th>Column / field</th><th>Problem</th><th>Expected</th></tr></thead>
                <tbody>
                  {state.errors.map((p, k) => (
                    <tr key={k}><td className="num">{p.line ?? '—'}</td><td>{p.column ?? p.field ?? '—'}</td><td>{p.message}</td><td>{p.expected ?? ''}</td></tr>
                  ))}
                </tbody>
              </table>
            </div>
          )}
        </div>
      )}
    </form>
  );
}
