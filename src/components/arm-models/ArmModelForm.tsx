import { useEffect, useMemo, useRef, useState } from 'react';
import { parseGeometry } from '../../lib/engine/geometry';
import { EngineInputError, type ArmGeometry, type FrameSpec } from '../../lib/engine/types';
import { api, type ApiError } from '../../lib/shared/api-client';
import { checkGeometryValue, type FieldIssue } from '../../lib/shared/arm-model-form';
import ArmSketch from './ArmSketch';

/** One joint row as typed: text, so a half-typed number is not lost. */
interface JointRow {
  name: string;
  type: 'revolute' | 'prismatic';
  a: string;
  alpha: string;
  d: string;
  theta: string;
  useBeta: boolean;
  beta: string;
  min: string;
  max: string;
}

const FRAME_KEYS = ['x', 'y', 'z', 'rx', 'ry', 'rz'] as const;
type FrameRow = Record<(typeof FRAME_KEYS)[number], string>;

const str = (v: number | undefined) => (v === undefined ? '' : String(v));

function rowsFrom(g: ArmGeometry): JointRow[] {
  return g.joints.map((j) => ({
    name: j.name,
    type: j.type,
    a: str(j.a),
    alpha: str(j.alpha),
    d: str(j.d),
    theta: str(j.theta),
    useBeta: j.beta !== undefined,
    beta: str(j.beta ?? 0),
    min: str(j.min),
    max: str(j.max),
  }));
}

const frameFrom = (f: FrameSpec | undefined): FrameRow => ({ x: str(f?.x ?? 0), y: str(f?.y ?? 0), z: str(f?.z ?? 0), rx: str(f?.rx ?? 0), ry: str(f?.ry ?? 0), rz: str(f?.rz ?? 0) });

const emptyRow = (i: number): JointRow => ({ name: `J${i + 1}`, type: 'revolute', a: '0', alpha: '0', d: '0', theta: '0', useBeta: false, beta: '0', min: '-180', max: '180' });

/** Text → number for the schema: empty → undefined ("is required"), anything else through Number (NaN → "must be a number"). */
const num = (s: string): number | undefined => (s.trim() === '' ? undefined : Number(s.trim()));

function buildGeometry(name: string, convention: 'dh' | 'mdh', rows: JointRow[], tool: FrameRow, base: FrameSpec | undefined): unknown {
  const joints = rows.map((r) => {
    const j: Record<string, unknown> = { name: r.name, type: r.type, a: num(r.a), alpha: num(r.alpha), d: num(r.d), theta: num(r.theta) };
    if (r.useBeta) j.beta = num(r.beta);
    if (r.min.trim() !== '') j.min = num(r.min);
    if (r.max.trim() !== '') j.max = num(r.max);
    return j;
  });
  const t: Record<string, unknown> = {};
  for (const k of FRAME_KEYS) t[k] = num(tool[k]);
  const g: Record<string, unknown> = { format: 'offsetry-arm/1', name: name.trim() || 'unnamed', convention, joints, tool: t };
  if (base) g.base = base;
  return g;
}

export interface ArmModelFormProps {
  mode: 'create' | 'edit';
  modelId?: string;
  initial?: { name: string; manufacturer: string; description: string; geometry: ArmGeometry };
  /** Edit: the latest revision is used by units or sessions, so a geometry change makes the next revision. */
  latestInUse?: boolean;
  latestRevision?: number;
}

/**
 * The arm model form: metadata, one row per joint, convention and tool offset. Checked with the engine's
 * geometry schema while typing (the server checks again); problems sit beside their fields.
 */
export default function ArmModelForm({ mode, modelId, initial, latestInUse = false, latestRevision }: ArmModelFormProps) {
  // Set once React has taken over, so nothing submits natively before that (and tests can wait for it).
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const start = initial?.geometry;
  const [name, setName] = useState(initial?.name ?? '');
  const [manufacturer, setManufacturer] = useState(initial?.manufacturer ?? '');
  const [description, setDescription] = useState(initial?.description ?? '');
  const [note, setNote] = useState('');
  const [convention, setConvention] = useState<'dh' | 'mdh'>(start?.convention ?? 'mdh');
  const [rows, setRows] = useState<JointRow[]>(start ? rowsFrom(start) : Array.from({ length: 6 }, (_, i) => emptyRow(i)));
  const [tool, setTool] = useState<FrameRow>(frameFrom(start?.tool));
  const [base, setBase] = useState<FrameSpec | undefined>(start?.base);
  const [touched, setTouched] = useState(false);
  const [serverError, setServerError] = useState<ApiError | null>(null);
  const [importProblems, setImportProblems] = useState<FieldIssue[]>([]);
  const [importNote, setImportNote] = useState('');
  const [busy, setBusy] = useState(false);
  const fileInput = useRef<HTMLInputElement>(null);

  const candidate = useMemo(() => buildGeometry(name, convention, rows, tool, base), [name, convention, rows, tool, base]);
  const checked = useMemo(() => checkGeometryValue(candidate, ''), [candidate]);
  const clientIssues: FieldIssue[] = checked.ok ? [] : checked.issues;
  const serverIssues: FieldIssue[] = (serverError?.errors ?? []).map((e) => ({ ...e, field: e.field?.replace(/^geometry\.?/, '') }));
  const issues = [...(touched ? clientIssues : []), ...serverIssues];
  const nameProblem = touched && !name.trim() ? 'name must not be empty' : issues.find((i) => i.field === 'name')?.message;
  const issueAt = (field: string) => issues.filter((i) => i.field === field).map((i) => i.message).join('; ') || undefined;
  const placed = new Set<string>(['name']);
  rows.forEach((_, i) => ['name', 'type', 'a', 'alpha', 'd', 'theta', 'beta', 'min', 'max'].forEach((k) => placed.add(`joints[${i}].${k}`)));
  FRAME_KEYS.forEach((k) => placed.add(`tool.${k}`));
  const unplaced = issues.filter((i) => !i.field || !placed.has(i.field));

  const setRow = (i: number, patch: Partial<JointRow>) => setRows((rs) => rs.map((r, k) => (k === i ? { ...r, ...patch } : r)));

  async function importFile(file: File) {
    setImportNote('');
    const text = await file.text();
    try {
      const g = parseGeometry(text, file.name);
      setImportProblems([]);
      if (!name.trim() || mode === 'create') setName(g.name);
      setConvention(g.convention);
      setRows(rowsFrom(g));
      setTool(frameFrom(g.tool));
      setBase(g.base);
      setImportNote(`Read ${file.name}: ${g.joints.length} joints, ${g.convention === 'mdh' ? 'modified DH' : 'DH'}. Check the rows, then save.`);
    } catch (e) {
      if (e instanceof EngineInputError) {
        setImportProblems(e.problems.map((p) => ({ field: p.column, line: p.line, message: p.message, expected: p.expected })));
        setImportNote(`${file.name} was not read: fix the problems below and import it again. The form is unchanged.`);
      } else throw e;
    }
  }

  async function submit(e: React.FormEvent) {
    e.preventDefault();
    setTouched(true);
    setServerError(null);
    if (!checked.ok || !name.trim()) return;
    setBusy(true);
    const body = { name: name.trim(), manufacturer, description, geometry: checked.geometry, ...(mode === 'edit' && note.trim() ? { note: note.trim() } : {}) };
    const r = mode === 'create' ? await api<{ id: string }>('/api/arm-models', { method: 'POST', json: body }) : await api<{ id: string }>(`/api/arm-models/${modelId}`, { method: 'PUT', json: body });
    setBusy(false);
    if (r.error) return setServerError(r.error);
    location.href = `/arm-models/${r.data.id}`;
  }

  const cell = (i: number, key: 'a' | 'alpha' | 'd' | 'theta' | 'beta' | 'min' | 'max', label: string, disabled = false) => {
    const problem = issueAt(`joints[${i}].${key}`);
    return (
      <td className="align-top">
        <input
          className={`input num w-24 ${problem ? 'border-error' : ''}`}
          inputMode="decimal"
          aria-label={`${rows[i]!.name || `joint ${i + 1}`} ${label}`}
          aria-invalid={problem ? true : undefined}
          disabled={disabled}
          value={rows[i]![key]}
          onChange={(ev) => setRow(i, { [key]: ev.target.value })}
          onBlur={() => setTouched(true)}
          data-field={`joints[${i}].${key}`}
        />
        {problem && <span className="mt-1 block max-w-40 text-xs text-error" role="alert">✕ {problem}</span>}
      </td>
    );
  };

  const limitUnit = (r: JointRow) => (r.type === 'prismatic' ? 'mm' : 'deg');

  return (
    <form onSubmit={submit} noValidate className="flex flex-col gap-6" data-arm-model-form data-hydrated={hydrated ? 'true' : undefined}>
      <section className="card grid gap-4 md:grid-cols-3">
        <label className="field">
          <span>Name</span>
          <input className="input" name="name" value={name} onChange={(e) => setName(e.target.value)} onBlur={() => setTouched(true)} aria-invalid={nameProblem ? true : undefined} />
          {nameProblem && <span className="text-xs text-error" role="alert">✕ {nameProblem}</span>}
        </label>
        <label className="field">
          <span>Manufacturer</span>
          <input className="input" name="manufacturer" value={manufacturer} onChange={(e) => setManufacturer(e.target.value)} />
        </label>
        <label className="field">
          <span>Convention</span>
          <select className="input" name="convention" value={convention} onChange={(e) => setConvention(e.target.value as 'dh' | 'mdh')}>
            <option value="mdh">Modified DH (mdh)</option>
            <option value="dh">Denavit–Hartenberg (dh)</option>
          </select>
        </label>
        <label className="field md:col-span-3">
          <span>Description</span>
          <textarea className="input" name="description" value={description} onChange={(e) => setDescription(e.target.value)} />
        </label>
      </section>

      <section className="card flex flex-col gap-3">
        <div className="flex flex-wrap items-center gap-3">
          <h2 className="mr-auto">Joints</h2>
          <input ref={fileInput} type="file" accept=".json,application/json" className="sr-only" tabIndex={-1} aria-label="Geometry file to import" data-import-input onChange={(e) => e.target.files?.[0] && importFile(e.target.files[0]).finally(() => (e.target.value = ''))} />
          <button type="button" className="btn btn-quiet" onClick={() => fileInput.current?.click()}>
            Import geometry file…
          </button>
        </div>
        {importNote && <p className={importProblems.length ? 'notice notice-error' : 'notice'} role="status">{importNote}</p>}
        {importProblems.length > 0 && (
          <ul className="list-disc pl-6 text-sm text-error" data-import-problems>
            {importProblems.map((p, i) => (
              <li key={i}>
                {p.line !== undefined && `line ${p.line}`}
                {p.field && `${p.line !== undefined ? ', ' : ''}field ${p.field}`}
                {(p.line !== undefined || p.field) && ': '}
                {p.message}
                {p.expected && ` (expected ${p.expected})`}
              </li>
            ))}
          </ul>
        )}
        <div className="overflow-x-auto">
          <table className="data-table">
            <thead>
              <tr>
                <th>#</th>
                <th>Name</th>
                <th>Type</th>
                <th className="num">a (mm)</th>
                <th className="num">alpha (deg)</th>
                <th className="num">d (mm)</th>
                <th className="num">theta (deg)</th>
                <th className="num">beta (deg)</th>
                <th className="num">min (deg | mm)</th>
                <th className="num">max (deg | mm)</th>
                <th />
              </tr>
            </thead>
            <tbody>
              {rows.map((r, i) => {
                const nameIssue = issueAt(`joints[${i}].name`);
                return (
                  <tr key={i} data-joint-row={i}>
                    <td className="num align-top">{i + 1}</td>
                    <td className="align-top">
                      <input className="input w-20" aria-label={`joint ${i + 1} name`} value={r.name} onChange={(e) => setRow(i, { name: e.target.value })} data-field={`joints[${i}].name`} />
                      {nameIssue && <span className="mt-1 block max-w-40 text-xs text-error" role="alert">✕ {nameIssue}</span>}
                    </td>
                    <td className="align-top">
                      <select className="input" aria-label={`joint ${i + 1} type`} value={r.type} onChange={(e) => setRow(i, { type: e.target.value as JointRow['type'] })}>
                        <option value="revolute">revolute</option>
                        <option value="prismatic">prismatic</option>
                      </select>
                    </td>
                    {cell(i, 'a', 'a (mm)')}
                    {cell(i, 'alpha', 'alpha (deg)')}
                    {cell(i, 'd', 'd (mm)')}
                    {cell(i, 'theta', 'theta (deg)')}
                    <td className="align-top">
                      <div className="flex items-center gap-2">
                        <input type="checkbox" className="h-5 w-5" aria-label={`joint ${i + 1}: include beta`} checked={r.useBeta} onChange={(e) => setRow(i, { useBeta: e.target.checked })} />
                        <input
                          className="input num w-20"
                          inputMode="decimal"
                          aria-label={`${r.name || `joint ${i + 1}`} beta (deg)`}
                          disabled={!r.useBeta}
                          value={r.useBeta ? r.beta : ''}
                          placeholder="—"
                          onChange={(e) => setRow(i, { beta: e.target.value })}
                          data-field={`joints[${i}].beta`}
                        />
                      </div>
                      {issueAt(`joints[${i}].beta`) && <span className="mt-1 block text-xs text-error" role="alert">✕ {issueAt(`joints[${i}].beta`)}</span>}
                    </td>
                    {cell(i, 'min', `min (${limitUnit(r)})`)}
                    {cell(i, 'max', `max (${limitUnit(r)})`)}
                    <td className="align-top">
                      <button type="button" className="btn btn-quiet" aria-label={`remove joint ${i + 1}`} disabled={rows.length <= 1} onClick={() => setRows((rs) => rs.filter((_, k) => k !== i))}>
                        ✕
                      </button>
                    </td>
                  </tr>
                );
              })}
            </tbody>
          </table>
        </div>
        <div>
          <button type="button" className="btn btn-quiet" onClick={() => setRows((rs) => [...rs, emptyRow(rs.length)])}>
            Add a joint
          </button>
        </div>
        <p className="text-sm text-ink-soft">
          Limits are in degrees for revolute and millimetres for prismatic joints; leave both empty for no limit. Tick beta only where the
          model carries Hayati's twist about y (for nearly parallel consecutive axes).
        </p>
      </section>

      <section className="card flex flex-col gap-3">
        <h2>Tool point (flange → target)</h2>
        <div className="grid grid-cols-2 gap-3 sm:grid-cols-3 md:grid-cols-6">
          {FRAME_KEYS.map((k) => {
            const problem = issueAt(`tool.${k}`);
            return (
              <label key={k} className="field">
                <span>
                  {k} ({k.startsWith('r') ? 'deg' : 'mm'})
                </span>
                <input className="input num" inputMode="decimal" value={tool[k]} onChange={(e) => setTool((t) => ({ ...t, [k]: e.target.value }))} data-field={`tool.${k}`} aria-invalid={problem ? true : undefined} />
                {problem && <span className="text-xs text-error" role="alert">✕ {problem}</span>}
              </label>
            );
          })}
        </div>
        {base && (
          <p className="notice">
            The imported file also gives a base frame (x {base.x}, y {base.y}, z {base.z} mm; rx {base.rx}, ry {base.ry}, rz {base.rz} deg); it is kept.{' '}
            <button type="button" className="btn btn-quiet" onClick={() => setBase(undefined)}>
              Drop the base frame
            </button>
          </p>
        )}
      </section>

      <section className="card flex flex-col gap-3">
        <h2>Sketch</h2>
        {checked.ok ? <ArmSketch geometry={checked.geometry} /> : <p className="text-ink-soft">The sketch appears when every row is valid.</p>}
      </section>

      {mode === 'edit' && (
        <section className="card flex flex-col gap-3">
          <label className="field">
            <span>Note on this change</span>
            <input className="input" name="note" value={note} onChange={(e) => setNote(e.target.value)} placeholder="e.g. corrected a3 from the drawing, rev. C" />
          </label>
          <p className={latestInUse ? 'notice notice-attention' : 'notice'}>
            {latestInUse
              ? `▲ Revision r${latestRevision} is used by units or sessions. Saving a changed geometry creates revision r${(latestRevision ?? 0) + 1}; r${latestRevision} stays as it is.`
              : `● No unit or session uses revision r${latestRevision} yet, so a changed geometry updates it in place.`}
          </p>
        </section>
      )}

      {(serverError || (touched && unplaced.length > 0)) && (
        <div className="notice notice-error" role="alert" data-form-errors>
          <p className="font-semibold">{serverError?.error ?? 'Some fields need attention.'}</p>
          {unplaced.length > 0 && (
            <ul className="list-disc pl-6 text-sm">
              {unplaced.map((p, i) => (
                <li key={i}>
                  {p.field ? `${p.field}: ` : ''}
                  {p.message}
                </li>
              ))}
            </ul>
          )}
        </div>
      )}
      {touched && !checked.ok && <p className="text-sm text-error">✕ {clientIssues.length} problem(s) in the form; they are marked beside the fields.</p>}

      <div className="flex gap-3">
        <button type="submit" className="btn" disabled={busy || !hydrated}>
          {mode === 'create' ? 'Create arm model' : 'Save changes'}
        </button>
        <a className="btn btn-quiet" href={mode === 'edit' ? `/arm-models/${modelId}` : '/arm-models'}>
          Cancel
        </a>
      </div>
    </form>
  );
}

