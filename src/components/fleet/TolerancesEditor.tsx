import { useState } from 'react';
import { api } from '../../lib/shared/api-client';

type Tolerances = { lengths: number; twists: number; offsets: number; beta: number; base: number | null; tool: number };

const FIELDS: { key: keyof Tolerances; label: string; unit: string }[] = [
  { key: 'lengths', label: 'Lengths (a, d)', unit: 'mm' },
  { key: 'twists', label: 'Twists (alpha)', unit: 'deg' },
  { key: 'offsets', label: 'Zero offsets (theta)', unit: 'deg' },
  { key: 'beta', label: 'Beta', unit: 'deg' },
  { key: 'base', label: 'Base frame position (empty: not checked)', unit: 'mm' },
  { key: 'tool', label: 'Tool point', unit: 'mm' },
];

/** Drift tolerances of an arm model; editable by engineers and admins (the PUT route enforces it too). */
export default function TolerancesEditor({ modelId, initial, defaults, canEdit }: { modelId: string; initial: Tolerances; defaults: boolean; canEdit: boolean }) {
  const [values, setValues] = useState<Record<keyof Tolerances, string>>(() => Object.fromEntries(FIELDS.map((f) => [f.key, initial[f.key] === null ? '' : String(initial[f.key])])) as Record<keyof Tolerances, string>);
  const [isDefault, setIsDefault] = useState(defaults);
  const [message, setMessage] = useState<{ kind: 'ok' | 'error'; text: string; fields?: string[] } | null>(null);

  async function save(e: React.FormEvent) {
    e.preventDefault();
    // An empty base field means: leave the base frame out of drift checks.
    const body = Object.fromEntries(FIELDS.map((f) => [f.key, values[f.key].trim() === '' ? (f.key === 'base' ? null : undefined) : Number(values[f.key])]));
    const r = await api<{ tolerances: Tolerances; defaults: boolean }>(`/api/arm-models/${modelId}/tolerances`, { method: 'PUT', json: body });
    if (r.error) {
      setMessage({ kind: 'error', text: [r.error.error, ...r.error.errors.map((x) => `${x.field ?? ''}: ${x.message}`)].join(' '), fields: r.error.errors.map((x) => x.field ?? '') });
      return;
    }
    setIsDefault(r.data.defaults);
    setMessage({ kind: 'ok', text: 'Tolerances saved. They apply to approvals from now on.' });
  }

  return (
    <form onSubmit={save} className="card flex flex-col gap-3" aria-label="Drift tolerances">
      <h2>Drift tolerances</h2>
      <p className="text-sm text-ink-soft">
        An approved set whose change from the unit's previous version exceeds one of these raises a drift alert. {isDefault ? 'These are the defaults.' : ''}
        {' '}A prismatic joint's zero uses the lengths tolerance; base rotations use the twists tolerance. Leave the base frame empty unless the tracker has a fixed mount in the cell: otherwise its position changes every visit.
      </p>
      <div className="grid gap-3 sm:grid-cols-3">
        {FIELDS.map((f) => (
          <label key={f.key} className="field">
            <span>{f.label} ({f.unit})</span>
            <input
              className="input num"
              name={f.key}
              inputMode="decimal"
              value={values[f.key]}
              disabled={!canEdit}
              aria-invalid={message?.fields?.includes(f.key) || undefined}
              onChange={(e) => setValues({ ...values, [f.key]: e.target.value })}
            />
          </label>
        ))}
      </div>
      {canEdit ? (
        <button type="submit" className="btn self-start">Save tolerances</button>
      ) : (
        <p className="text-sm text-ink-soft">Only a metrology engineer or an administrator can change them.</p>
      )}
      {message && <p className={message.kind === 'ok' ? 'notice' : 'notice notice-error'} role="status">{message.kind === 'ok' ? '✓ ' : '✕ '}{message.text}</p>}
    </form>
  );
}
