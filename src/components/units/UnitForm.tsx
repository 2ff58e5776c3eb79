import { useEffect, useState } from 'react';
import { api, type ApiError } from '../../lib/shared/api-client';
import { openResult } from '../../lib/shared/focus';
import { ErrorSummary, FieldProblem, fieldProps } from '../FormErrors';

export interface ModelChoice {
  id: string;
  name: string;
  revisions: number[];
}

/** Register a unit: serial number, arm model and revision (latest by default), site, cell, commissioning date, notes. */
export default function UnitForm({ models, initialModel }: { models: ModelChoice[]; initialModel?: string }) {
  // Set once React has taken over, so nothing submits natively before that (and tests can wait for it).
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  const [modelId, setModelId] = useState(initialModel && models.some((m) => m.id === initialModel) ? initialModel : (models[0]?.id ?? ''));
  const [revision, setRevision] = useState('');
  const [error, setError] = useState<ApiError | null>(null);
  const [busy, setBusy] = useState(false);
  const model = models.find((m) => m.id === modelId);
  const latest = model?.revisions[model.revisions.length - 1];

  async function submit(e: React.FormEvent<HTMLFormElement>) {
    e.preventDefault();
    const f = new FormData(e.currentTarget);
    const body: Record<string, unknown> = {
      serial: String(f.get('serial') ?? ''),
      modelId,
      site: String(f.get('site') ?? ''),
      cell: String(f.get('cell') ?? ''),
      commissionedOn: String(f.get('commissionedOn') ?? '') || null,
      notes: String(f.get('notes') ?? ''),
    };
    if (revision) body.revision = Number(revision);
    setBusy(true);
    const r = await api<{ serial: string }>('/api/units', { method: 'POST', json: body });
    setBusy(false);
    if (r.error) return setError(r.error);
    openResult(`/units/${encodeURIComponent(r.data.serial)}`);
  }

  if (models.length === 0) return <p className="notice notice-attention">▲ There is no arm model yet. A metrology engineer creates one under Arm models first.</p>;

  const FIELDS = {
    serial: { id: 'unit-serial', label: 'Serial number' },
    modelId: { id: 'unit-model', label: 'Arm model' },
    revision: { id: 'unit-revision', label: 'Revision' },
    site: { id: 'unit-site', label: 'Site' },
    cell: { id: 'unit-cell', label: 'Cell' },
    commissionedOn: { id: 'unit-commissioned', label: 'Commissioned on' },
    notes: { id: 'unit-notes', label: 'Notes' },
  };
  const Problem = ({ field }: { field: keyof typeof FIELDS }) => <FieldProblem error={error} field={field} id={FIELDS[field].id} />;
  const props = (field: keyof typeof FIELDS) => fieldProps(error, field, FIELDS[field].id);

  return (
    <form onSubmit={submit} className="card grid gap-4 md:grid-cols-2" data-unit-form data-hydrated={hydrated ? 'true' : undefined} noValidate>
      <div className="md:col-span-2 empty:hidden" data-form-errors>
        <ErrorSummary error={error} fields={FIELDS} />
      </div>
      <label className="field">
        <span>Serial number</span>
        <input className="input" {...props('serial')} name="serial" required maxLength={64} pattern="[A-Za-z0-9][A-Za-z0-9._\-]*" placeholder="e.g. LAB-R6-0417" autoComplete="off" />
        <Problem field="serial" />
      </label>
      <div className="grid grid-cols-2 gap-3">
        <label className="field">
          <span>Arm model</span>
          <select className="input" {...props('modelId')} name="modelId" value={modelId} onChange={(e) => { setModelId(e.target.value); setRevision(''); }}>
            {models.map((m) => <option key={m.id} value={m.id}>{m.name}</option>)}
          </select>
          <Problem field="modelId" />
        </label>
        <label className="field">
          <span>Revision</span>
          <select className="input" {...props('revision')} name="revision" value={revision} onChange={(e) => setRevision(e.target.value)}>
            <option value="">latest (r{latest})</option>
            {model?.revisions.map((r) => <option key={r} value={r}>r{r}</option>)}
          </select>
          <Problem field="revision" />
        </label>
      </div>
      <label className="field">
        <span>Site</span>
        <input className="input" {...props('site')} name="site" maxLength={200} placeholder="e.g. Plant North" />
        <Problem field="site" />
      </label>
      <label className="field">
        <span>Cell</span>
        <input className="input" {...props('cell')} name="cell" maxLength={200} placeholder="e.g. Cell 4" />
        <Problem field="cell" />
      </label>
      <label className="field">
        <span>Commissioned on</span>
        <input className="input" {...props('commissionedOn')} type="date" name="commissionedOn" />
        <Problem field="commissionedOn" />
      </label>
      <label className="field md:col-span-2">
        <span>Notes</span>
        <textarea className="input" {...props('notes')} name="notes" maxLength={4000} />
        <Problem field="notes" />
      </label>
      <div className="flex gap-3 md:col-span-2">
        <button className="btn" type="submit" disabled={busy || !hydrated}>Register unit</button>
        <a className="btn btn-quiet" href="/units">Cancel</a>
      </div>
    </form>
  );
}
