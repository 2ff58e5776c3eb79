import { useState } from 'react';
import { OverrideField } from './Verdicts';

interface Props {
  /** The fit is implausible: submitting needs a written override of at least 20 characters. */
  implausible: boolean;
  canOverride: boolean;
  busy: boolean;
  /** Submit with the note for the reviewer and the override (both trimmed). */
  onSubmit: (comment: string, override: string) => void;
}

/** The form that sends a fitted fit to review, with the override an implausible one needs. */
export default function SubmitForReview({ implausible, canOverride, busy, onSubmit }: Props) {
  const [comment, setComment] = useState('');
  const [override, setOverride] = useState('');
  return (
    <section className="card mb-6" data-submit-review>
      <h2 className="mb-2">Submit for review</h2>
      <label className="field mb-3">
        <span>Note for the reviewer (optional)</span>
        <textarea className="input" name="submit-note" value={comment} onChange={(e) => setComment(e.target.value)} maxLength={4000} />
      </label>
      {implausible && <OverrideField value={override} onChange={setOverride} allowed={canOverride} />}
      <button type="button" className="btn" disabled={busy || (implausible && (!canOverride || override.trim().length < 20))} onClick={() => onSubmit(comment.trim(), override.trim())}>
        {implausible ? 'Submit with override' : 'Submit for review'}
      </button>
    </section>
  );
}
