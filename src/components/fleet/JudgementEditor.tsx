import { useState } from 'react';
import { api } from '../../lib/shared/api-client';

type Settings = { lengthBoundMm: number; angleBoundDeg: number; instrumentNoiseMm: number; toolFixture: boolean };

const FIELDS: { key: Exclude<keyof Settings, 'toolFixture'>; label: string }[] = [
  { key: 'lengthBoundMm', label: 'Plausible length change from nominal (mm)' },
  { key: 'angleBoundDeg', label: 'Plausible angle change from nominal (deg)' },
  { key: 'instrumentNoiseMm', label: "Instrument's stated noise (mm, 1σ per coordinate)" },
];

/** The model's plausibility bounds, instrument noise and tool fixture; editable by engineers and admins. */
export default function JudgementEditor({ modelId, initial, defaults, canEdit }: { modelId: string; initial: Settings; defaults: boolean; canEdit: boolean }) {
  const [values, setValues] = useState(() => Object.fromEntries(FIELDS.map((f) => [f.key, String(initial[f.key])])) as Record<string, string>);
  const [fixture, setFixture] = useState(initial.toolFixture);
  const [isDefault, setIsDefault] = useState(defaults);
  const [message, setMessage] = useState<{ kind: 'ok' | 'error'; text: string } | null>(null);

  async function save(e: React.FormEvent) {
    e.preventDefault();
    const body = { ...Object.fromEntries(FIELDS.map((f) => [f.key, Number(values[f.key])])), toolFixture: fixture };
    const r = await api<{ defaults: boolean }>(`/api/arm-models/${modelId}/judgement`, { method: 'PUT', json: body });
    if (r.error) return setMessage({ kind: 'error', text: [r.error.error, ...r.error.errors.map((x) => `${x.field ?? ''}: ${x.message}`)].join(' ') });
    setIsDefault(r.data.defaults);
    setMessage({ kind: 'ok', text: 'Saved. Fits made from now on and this fleet view use them.' });
  }

  return (
    <form onSubmit={save} className="card flex flex-col gap-3" aria-label="Plausibility settings">
      <h2>Plausibility settings</h2>
      <p className="text-sm text-ink-soft">
        Every fit of this model is judged with these: a parameter moving further from nominal, or residuals far above the instrument's noise, makes the fit
        implausible (it then needs an engineer's written override to be submitted). {isDefault ? 'These are the defaults.' : ''}
      </p>
      <div className="grid gap-3 sm:grid-cols-3">
        {FIELDS.map((f) => (
          <label key={f.key} className="field">
            <span>{f.label}</span>
            <input className="input num" name={f.key} inputMode="decimal" value={values[f.key]} disabled={!canEdit} onChange={(e) => setValues({ ...values, [f.key]: e.target.value })} />
          </label>
        ))}
      </div>
      <label className="flex min-h-11 items-center gap-2">
        <input type="checkbox" className="h-5 w-5 accent-accent" name="toolFixture" checked={fixture} disabled={!canEdit} onChange={(e) => setFixture(e.target.checked)} />
        <span>The tool is a fixed fixture (judge the tool point in the fleet view and by the change bounds)</span>
      </label>
      {canEdit ? <button type="submit" className="btn self-start">Save plausibility settings</button> : <p className="text-sm text-ink-soft">Only a metrology engineer or an administrator can change them.</p>}
      {message && <p className={message.kind === 'ok' ? 'notice' : 'notice notice-error'} role="status">{message.kind === 'ok' ? '✓ ' : '✕ '}{message.text}</p>}
    </form>
  );
}
