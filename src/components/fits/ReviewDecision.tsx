import { useEffect, useState } from 'react';
import { api, type ApiError } from '../../lib/shared/api-client';
import { useFocusWhen } from '../../lib/shared/focus';
import SafetyNotice from '../SafetyNotice';

interface Props {
  fitId: string;
  serial: string;
  /** Why this person may not approve (four-eyes rule), or null. */
  refusal: string | null;
}

/** Approve (after reading the safety caution) or return a fit awaiting review, with a comment. */
export default function ReviewDecision({ fitId, serial, refusal }: Props) {
  const [comment, setComment] = useState('');
  const [read, setRead] = useState(false);
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<ApiError | null>(null);
  const [done, setDone] = useState<string | null>(null);
  // A tick before hydration would be lost; the box is usable once the island runs.
  const [hydrated, setHydrated] = useState(false);
  useEffect(() => setHydrated(true), []);
  // Focus follows the outcome: the decision's result, or what went wrong.
  const doneRef = useFocusWhen<HTMLDivElement>(done);
  const errorRef = useFocusWhen<HTMLDivElement>(error);

  async function decide(action: 'approve' | 'reject') {
    setBusy(true);
    setError(null);
    const body = comment.trim() ? { comment: comment.trim() } : {};
    const res = await api<{ parameterSet?: { version: number } }>(`/api/fits/${fitId}/${action}`, { method: 'POST', json: body });
    setBusy(false);
    if (res.error) return setError(res.error);
    setDone(action === 'approve' ? `Approved: unit ${serial} now has parameter set v${res.data.parameterSet?.version}.` : 'Returned to the submitter with your reason.');
  }

  if (done) {
    return (
      <div ref={doneRef} className="notice" role="status" data-review-done>
        <p>✓ {done}</p>
        <p className="mt-2">
          <a href={`/units/${encodeURIComponent(serial)}`}>Open unit {serial}</a> · <a href="/reviews">Back to reviews</a>
        </p>
      </div>
    );
  }

  return (
    <div className="grid gap-4" data-review-decision>
      <label className="field">
        <span>Comment (required to return the fit, optional to approve)</span>
        <textarea className="input" value={comment} onChange={(e) => setComment(e.target.value)} maxLength={4000} name="comment" />
      </label>
      {refusal ? (
        <div className="notice notice-attention" role="note" data-four-eyes>
          <p>▲ {refusal}</p>
        </div>
      ) : (
        <>
          <SafetyNotice />
          <label className="flex min-h-11 items-center gap-2">
            <input type="checkbox" className="h-5 w-5 accent-accent" checked={read} disabled={!hydrated} onChange={(e) => setRead(e.target.checked)} />I have read this
          </label>
        </>
      )}
      <div className="flex flex-wrap gap-3">
        {!refusal && (
          <button type="button" className="btn" disabled={busy || !read} onClick={() => decide('approve')}>
            ✓ Approve as the next parameter set
          </button>
        )}
        <button type="button" className="btn btn-quiet" disabled={busy || !comment.trim()} onClick={() => decide('reject')}>
          ✕ Return with this reason
        </button>
      </div>
      {error && (
        <div ref={errorRef} className="notice notice-error" role="alert">
          <p className="font-semibold">✕ {error.error}</p>
          {error.errors.map((p, i) => <p key={i}>{p.field ? `${p.field}: ` : ''}{p.message}</p>)}
        </div>
      )}
    </div>
  );
}
