import { useEffect, useRef, useState } from 'react';
import { useDropzone } from 'react-dropzone';
import { formatBytes } from '../../lib/shared/display';
import { openResult, useFocusWhen } from '../../lib/shared/focus';
import type { UploadRefusal } from '../../lib/shared/upload';

/**
 * What a refused upload answers (UploadRefusal); `errors` may be missing when the refusal did not come from
 * the app (a proxy's error page, a dropped connection: only the status text is known).
 */
type Refusal = Omit<UploadRefusal, 'errors'> & { errors?: UploadRefusal['errors'] };

interface Props {
  units: { serial: string; model: string; site: string }[];
  initialUnit: string;
  today: string;
  technician: string;
  maxBytes: number;
}

type State =
  | { kind: 'idle' }
  | { kind: 'hashing' }
  | { kind: 'uploading'; sent: number; total: number; direct: boolean }
  | { kind: 'checking' }
  | { kind: 'refused'; status: number; body: Refusal }
  | { kind: 'done'; url: string };

/**
 * Files above this size go straight to the file store by a presigned URL (POST /api/sessions/uploads), so
 * the app never holds their bytes; smaller ones, and any file when the server or the browser cannot do
 * that, go through the app as multipart.
 */
const PRESIGNED_ABOVE_BYTES = 5 * 1024 * 1024;

const hex = (buf: ArrayBuffer) => Array.from(new Uint8Array(buf), (b) => b.toString(16).padStart(2, '0')).join('');

async function postJson(path: string, body: unknown): Promise<{ status: number; body: any }> {
  const res = await fetch(path, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
  let parsed: any = { error: res.statusText };
  try {
    parsed = await res.json();
  } catch {
    // keep the status text
  }
  return { status: res.status, body: parsed };
}

/** Drop zone + metadata form; uploads with XMLHttpRequest so the bytes sent can be shown. */
/** The form's own fields, by the name the API uses for them in a refusal. */
const META_FIELDS: Record<string, string> = {
  unit: 'Unit (serial number)',
  measuredOn: 'Measured on',
  technician: 'Technician',
  instrument: 'Laser tracker / instrument id',
  instrumentUncertainty: "Instrument's stated uncertainty",
  ambientC: 'Ambient temperature (°C)',
  target: 'Target (SMR) and mounting',
  notes: 'Notes',
};

export default function UploadForm({ units, initialUnit, today, technician, maxBytes }: Props) {
  const [file, setFile] = useState<File | null>(null);
  const [state, setState] = useState<State>({ kind: 'idle' });
  const [override, setOverride] = useState(false);
  const formRef = useRef<HTMLFormElement>(null);
  // Set once React has attached its handlers (tests and scripts wait for it before pressing keys).
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);

  const { getRootProps, getInputProps, isDragActive, inputRef } = useDropzone({
    multiple: false,
    // No type filter here: the server reads the content and says precisely what is wrong with a non-CSV file.
    onDrop: (accepted) => {
      if (accepted[0]) {
        setFile(accepted[0]);
        setState({ kind: 'idle' });
        setOverride(false);
      }
    },
  });

  // A file chosen before the page finished loading (a slow tablet in the cell) is taken on hydration.
  useEffect(() => {
    const early = inputRef.current?.files?.[0];
    if (early) setFile((current) => current ?? early);
  }, [inputRef]);

  function finish(status: number, parsed: Refusal & { url?: string }) {
    if (status === 201 && parsed.url) {
      setState({ kind: 'done', url: parsed.url });
      openResult(parsed.url);
    } else setState({ kind: 'refused', status, body: parsed });
  }

  /** PUT the file to a presigned URL with progress; resolves with the status (0: not reachable, e.g. CORS). */
  function putFile(url: string, headers: Record<string, string>, f: File): Promise<number> {
    return new Promise((resolve) => {
      const xhr = new XMLHttpRequest();
      xhr.open('PUT', url);
      for (const [k, v] of Object.entries(headers)) xhr.setRequestHeader(k, v);
      xhr.upload.onprogress = (ev) => setState({ kind: 'uploading', sent: ev.loaded, total: ev.lengthComputable ? ev.total : f.size, direct: true });
      xhr.onerror = () => resolve(0);
      xhr.onload = () => resolve(xhr.status);
      setState({ kind: 'uploading', sent: 0, total: f.size, direct: true });
      xhr.send(f);
    });
  }

  /**
   * The presigned path: hash, ask for an upload URL, PUT, complete. Returns false when the server or the
   * store cannot take it that way (the caller then sends the file through the app).
   */
  async function presignedUpload(f: File, meta: Record<string, string>): Promise<boolean> {
    setState({ kind: 'hashing' });
    let sha256: string;
    try {
      sha256 = hex(await crypto.subtle.digest('SHA-256', await f.arrayBuffer()));
    } catch {
      return false;
    }
    let started;
    try {
      started = await postJson('/api/sessions/uploads', { ...meta, fileName: f.name, bytes: f.size, sha256 });
    } catch {
      return false;
    }
    // 501: presigned uploads are off on this server; 404/405: an older server without the route.
    if ([404, 405, 501].includes(started.status)) return false;
    if (started.status !== 201) {
      finish(started.status, started.body);
      return true;
    }
    const put = await putFile(started.body.url, started.body.headers ?? {}, f);
    if (put < 200 || put >= 300) return false;
    setState({ kind: 'checking' });
    const { unit: _unit, ...rest } = meta;
    try {
      const done = await postJson('/api/sessions/uploads', { ...rest, uploadId: started.body.uploadId, complete: true });
      finish(done.status, done.body);
    } catch {
      setState({ kind: 'refused', status: 0, body: { error: 'The server could not be reached. Check the connection and upload again.' } });
    }
    return true;
  }

  async function submit(e?: React.FormEvent) {
    e?.preventDefault();
    const form = formRef.current;
    if (!form || !file) return;
    const fields = new FormData(form);
    const meta: Record<string, string> = {};
    for (const name of ['unit', 'measuredOn', 'technician', 'instrument', 'instrumentUncertainty', 'ambientC', 'target', 'notes']) meta[name] = String(fields.get(name) ?? '');
    meta.allowOutsideLimits = override ? 'true' : 'false';
    if (file.size > PRESIGNED_ABOVE_BYTES && globalThis.crypto?.subtle && (await presignedUpload(file, meta))) return;

    const body = new FormData();
    // The unit goes first so the server can check the CSV against the unit's model while it arrives.
    for (const [name, value] of Object.entries(meta)) body.append(name, value);
    body.append('file', file, file.name);

    const xhr = new XMLHttpRequest();
    xhr.open('POST', '/api/sessions');
    xhr.responseType = 'text';
    xhr.upload.onprogress = (ev) => setState({ kind: 'uploading', sent: ev.loaded, total: ev.lengthComputable ? ev.total : file.size, direct: false });
    xhr.upload.onload = () => setState({ kind: 'checking' });
    xhr.onerror = () => setState({ kind: 'refused', status: 0, body: { error: 'The server could not be reached. Check the connection and upload again.' } });
    xhr.onload = () => {
      let parsed: Refusal & { url?: string } = { error: xhr.statusText };
      try {
        parsed = JSON.parse(xhr.responseText);
      } catch {
        // keep the status text
      }
      finish(xhr.status, parsed);
    };
    setState({ kind: 'uploading', sent: 0, total: file.size, direct: false });
    xhr.send(body);
  }

  const busy = state.kind === 'hashing' || state.kind === 'uploading' || state.kind === 'checking' || state.kind === 'done';
  const refusal = state.kind === 'refused' ? state.body : undefined;
  // A refusal takes focus, so it is read out and the problems table is next in the tab order.
  const refusalRef = useFocusWhen<HTMLParagraphElement>(refusal);
  const metaProps = (name: string) => {
    const bad = refusal?.errors?.some((p) => p.field === name);
    return { id: `upload-${name}`, name, 'aria-invalid': bad ? true : undefined, 'aria-describedby': bad ? 'upload-refusal' : undefined } as const;
  };

  return (
    <form ref={formRef} onSubmit={submit} className="flex flex-col gap-5" noValidate data-upload-form data-hydrated={hydrated ? 'true' : undefined}>
      {/* What was refused comes first: the summary at the top of the form, with links to the fields it names. */}
      {refusal && (
        <div className="flex flex-col gap-3" data-refusal data-status={state.kind === 'refused' ? state.status : undefined}>
          <p ref={refusalRef} id="upload-refusal" className={`notice ${refusal.outsideLimits || state.kind === 'refused' && state.status === 409 ? 'notice-attention' : 'notice-error'}`} role="alert">
            {state.kind === 'refused' && state.status === 409 ? '▲ ' : '✕ '}
            {refusal.error}
            {refusal.existing && (
              <>
                {' '}
                <a href={refusal.existing.url} data-existing-session>
                  Open the existing session
                </a>
              </>
            )}
          </p>
          {refusal.errors && refusal.errors.length > 0 && (
            <div className="overflow-x-auto">
              <table className="data-table" data-problems>
                <thead>
                  <tr>
                    <th className="num">Line</th>
                    <th>Column / field</th>
                    <th>Problem</th>
                    <th>Expected</th>
                  </tr>
                </thead>
                <tbody>
                  {refusal.errors.map((p, k) => (
                    <tr key={k}>
                      <td className="num">{p.line ?? '—'}</td>
                      <td>{p.field && META_FIELDS[p.field] ? <a href={`#upload-${p.field}`} onClick={(e) => { e.preventDefault(); document.getElementById(`upload-${p.field}`)?.focus(); }}>{META_FIELDS[p.field]}</a> : (p.column ?? p.field ?? '—')}</td>
                      <td>{p.message}</td>
                      <td>{p.expected ?? ''}</td>
                    </tr>
                  ))}
                </tbody>
              </table>
              {refusal.truncated && <p className="mt-2 text-ink-soft">Only the first {refusal.errors.length} problems are listed; fix these and upload again to see the rest.</p>}
            </div>
          )}
        </div>
      )}
      {/* The file input sits beside the drop zone, not inside it: a control inside a button is not allowed. */}
      <input {...getInputProps()} name="file-picker" data-file-input />
      <div
        {...getRootProps({
          className: `flex min-h-40 cursor-pointer flex-col items-center justify-center gap-2 rounded-lg border-2 border-dashed p-6 text-center ${
            isDragActive ? 'border-accent bg-accent-soft' : 'border-rule bg-white'
          }`,
          // A button to the keyboard and to screen readers: Enter or Space opens the file chooser.
          role: 'button',
          'aria-label': file ? `Session file ${file.name} chosen: press to choose another` : 'Session file: drop a CSV here or press to choose one',
        })}
        data-dropzone
      >
        {file ? (
          <>
            <p className="font-semibold" data-chosen-file>
              ▤ {file.name}
            </p>
            <p className="text-ink-soft">{formatBytes(file.size)} · drop another file or tap to replace it</p>
          </>
        ) : (
          <>
            <p className="font-semibold">Drop the session CSV here, or tap to choose it</p>
            <p className="text-ink-soft">
              Header <code>pose,q1,…,qn,x,y,z</code> (optional <code>split</code>); at most {formatBytes(maxBytes)}.
            </p>
          </>
        )}
      </div>

      <div className="grid gap-4 md:grid-cols-2">
        <label className="field">
          <span>Unit (serial number)</span>
          <input className="input" {...metaProps('unit')} required defaultValue={initialUnit} list="upload-units" autoComplete="off" />
          <datalist id="upload-units">
            {units.map((u) => (
              <option key={u.serial} value={u.serial}>
                {u.model}
                {u.site ? ` · ${u.site}` : ''}
              </option>
            ))}
          </datalist>
        </label>
        <label className="field">
          <span>Measured on</span>
          <input className="input" {...metaProps('measuredOn')} type="date" required defaultValue={today} max={today} />
        </label>
        <label className="field">
          <span>Technician</span>
          <input className="input" {...metaProps('technician')} defaultValue={technician} maxLength={120} />
        </label>
        <label className="field">
          <span>Laser tracker / instrument id</span>
          <input className="input" {...metaProps('instrument')} maxLength={120} placeholder="e.g. tracker LT-07" />
        </label>
        <label className="field">
          <span>Instrument's stated uncertainty</span>
          <input className="input" {...metaProps('instrumentUncertainty')} maxLength={120} placeholder="as on its certificate, e.g. ±(15 µm + 6 µm/m), k = 2" />
        </label>
        <label className="field">
          <span>Ambient temperature (°C)</span>
          <input className="input" {...metaProps('ambientC')} inputMode="decimal" placeholder="e.g. 21.5" maxLength={32} />
        </label>
        <label className="field">
          <span>Target (SMR) and mounting</span>
          <input className="input" {...metaProps('target')} maxLength={200} placeholder="e.g. 1.5 in SMR on flange nest B" />
        </label>
        <label className="field md:col-span-2">
          <span>Notes</span>
          <textarea className="input" {...metaProps('notes')} maxLength={4000} />
        </label>
      </div>

      {refusal?.outsideLimits && (
        <label className="notice notice-attention flex min-h-11 items-start gap-3" data-override>
          <input type="checkbox" className="mt-1 h-6 w-6 shrink-0" checked={override} onChange={(e) => setOverride(e.target.checked)} name="allowOutsideLimits" />
          <span>
            ▲ I have checked the readings listed below. Store this session although these joint readings are outside the model's limits (the session will be
            marked as accepted with the outside-limits override).
          </span>
        </label>
      )}

      <div className="flex flex-wrap items-center gap-3">
        <button className="btn" type="submit" disabled={!file || busy || (refusal?.outsideLimits === true && !override)}>
          {refusal?.outsideLimits ? 'Upload again with the override' : 'Upload session'}
        </button>
        {!file && <span className="text-ink-soft">Choose a file first.</span>}
      </div>

      {state.kind === 'hashing' && (
        <p role="status" className="notice">
          ◌ Computing the file's checksum before the upload…
        </p>
      )}
      {state.kind === 'uploading' && (
        <div role="status" aria-live="polite" className="flex flex-col gap-1" data-upload-path={state.direct ? 'presigned' : 'app'}>
          <progress className="h-3 w-full" max={state.total || 1} value={state.sent} />
          <span className="text-ink-soft">
            Uploading{state.direct ? ' straight to the file store' : ''}: {formatBytes(state.sent)} of {formatBytes(state.total)} ({state.total ? Math.round((100 * state.sent) / state.total) : 0} %)
          </span>
        </div>
      )}
      {state.kind === 'checking' && (
        <p role="status" className="notice">
          ◌ Uploaded; checking and storing the session…
        </p>
      )}
      {state.kind === 'done' && (
        <p role="status" className="notice">
          ✓ Stored. Opening the session…
        </p>
      )}

    </form>
  );
}
