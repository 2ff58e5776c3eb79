import type { Verdict, Verdicts } from '../../lib/engine/plausibility';

const MARK: Record<Verdict['level'], string> = { pass: '✓', caution: '▲', implausible: '✕' };
const HEADLINE: Record<Verdict['level'], string> = {
  pass: '✓ Plausible: the result looks like a calibration of this unit',
  caution: '▲ Plausible with cautions: read them before submitting',
  implausible: '✕ Implausible: this result does not look like a calibration of this unit',
};

/** The plausibility verdicts of a fit (or of a session's pose-set check), with the rules they apply. */
export function VerdictList({ verdicts, subject = 'fit' }: { verdicts: Verdicts; subject?: 'fit' | 'session' }) {
  const cls = verdicts.level === 'implausible' ? 'notice notice-error' : verdicts.level === 'caution' ? 'notice notice-attention' : 'notice';
  return (
    <section className={`${cls} mb-6`} data-verdicts={verdicts.level} role={verdicts.level === 'implausible' ? 'alert' : 'status'}>
      <p className="font-semibold">{HEADLINE[verdicts.level]}</p>
      {verdicts.level === 'implausible' && subject === 'fit' && <p>It cannot be submitted for review without a written override by a metrology engineer, which the reviewer sees.</p>}
      <ul className="mt-1 list-none pl-0">
        {verdicts.verdicts.map((v) => (
          <li key={v.rule} data-verdict={v.rule} data-level={v.level} className="mt-1">
            <span aria-hidden="true">{MARK[v.level]} </span>
            <strong>{v.title}.</strong> {v.reason}
          </li>
        ))}
      </ul>
      <details className="mt-2 text-sm">
        <summary className="flex min-h-11 cursor-pointer items-center">The rules (engineer-editable bounds on the fleet page of the model)</summary>
        <ul className="list-disc pl-5">{verdicts.rules.map((r) => <li key={r}>{r}</li>)}</ul>
      </details>
    </section>
  );
}

/** The written override an implausible fit needs before it can be submitted. */
export function OverrideField({ value, onChange, allowed }: { value: string; onChange: (v: string) => void; allowed: boolean }) {
  if (!allowed) {
    return <p className="notice notice-error mb-3">✕ This fit is implausible. Only a metrology engineer can submit it, with a written override.</p>;
  }
  return (
    <label className="field mb-3">
      <span>Override (required: why should this implausible fit be reviewed anyway? The reviewer sees it.)</span>
      <textarea className="input" name="override" value={value} onChange={(e) => onChange(e.target.value)} minLength={20} maxLength={4000} required />
    </label>
  );
}
