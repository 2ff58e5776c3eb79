/**
 * The fit page's island: the fit's state while it runs (polled), then its report — accuracy before and after,
 * warnings, residual charts, parameters, correlations, observability and outliers — and the actions on it
 * (fit again without chosen poses, submit for review). Each part is a component of its own in this folder.
 */
import { useEffect, useRef, useState } from 'react';
import { api, type ApiError } from '../../lib/shared/api-client';
import type { FitView } from '../../lib/shared/fit-view';
import { focusResult, openResult, useFocusWhen } from '../../lib/shared/focus';
import CorrelationMap from './CorrelationMap';
import FitStatusCard from './FitStatusCard';
import FitWarnings from './FitWarnings';
import { mm } from './format';
import ObservabilityTable from './ObservabilityTable';
import OutlierPoses from './OutlierPoses';
import ParameterTable from './ParameterTable';
import ResidualCharts from './ResidualCharts';
import StatsTable from './StatsTable';
import SubmitForReview from './SubmitForReview';
import { isWaiting, useFitPolling } from './useFitPolling';
import { VerdictList } from './Verdicts';

interface Props {
  initial: FitView;
  canSubmit: boolean;
  canRefit: boolean;
  /** Shown after the residual charts: the page passes the 3-D view island here (Astro slot). */
  children?: React.ReactNode;
  /** May write the override an implausible fit needs (engineers, admins). */
  canOverride?: boolean;
}

export default function FitReport({ initial, canSubmit, canRefit, canOverride = false, children }: Props) {
  const { fit, reload } = useFitPolling(initial);
  const [busy, setBusy] = useState(false);
  const [error, setError] = useState<ApiError | null>(null);
  const [message, setMessage] = useState<string | null>(null);

  const waiting = isWaiting(fit);
  // When the fit finishes while the page is open, focus moves to its result (or its error).
  const wasWaiting = useRef(waiting);
  const resultRef = useRef<HTMLHeadingElement>(null);
  const failedRef = useRef<HTMLDivElement>(null);
  useEffect(() => {
    if (wasWaiting.current && !waiting) focusResult(fit.state === 'failed' ? failedRef.current : resultRef.current);
    wasWaiting.current = waiting;
  }, [waiting, fit.state]);
  const messageRef = useFocusWhen<HTMLParagraphElement>(message);
  const errorRef = useFocusWhen<HTMLDivElement>(error);

  const report = fit.report;
  const fileBase = `fit-${fit.unitSerial}-${fit.id.slice(0, 8)}`;
  const implausible = fit.verdicts?.level === 'implausible';

  async function refit(exclude: string[], note: string) {
    setBusy(true);
    setError(null);
    // Only the exclusions (and why): the server keeps every other setting of this fit.
    const res = await api<{ id: string }>(`/api/fits/${fit.id}/refit`, { method: 'POST', json: { exclude, ...(note ? { note } : {}) } });
    if (res.error) {
      setError(res.error);
      setBusy(false);
      return;
    }
    openResult(`/fits/${res.data.id}`);
  }

  async function submit(comment: string, override: string) {
    setBusy(true);
    setError(null);
    const res = await api(`/api/fits/${fit.id}/submit`, { method: 'POST', json: { ...(comment ? { comment } : {}), ...(implausible ? { override } : {}) } });
    setBusy(false);
    if (res.error) return setError(res.error);
    setMessage('Submitted for review. The engineers have been notified by e-mail.');
    await reload();
  }

  return (
    <div data-fit-report data-fit-state={fit.state} data-review-state={fit.reviewState ?? ''}>
      {fit.verdicts && <VerdictList verdicts={fit.verdicts} />}
      <FitStatusCard fit={fit} waiting={waiting} failedRef={failedRef} />

      {report && (
        <>
          <section className="card mb-6">
            <h2 className="mb-2" ref={resultRef}>Accuracy before and after</h2>
            <StatsTable report={report} />
            {report.registration.registered && <p className="mt-2 text-sm text-ink-soft">The tracker frame was registered to the robot base first (rigid fit, RMS {mm(report.registration.rmsMm)} mm); “before” uses that registered nominal.</p>}
          </section>
          <FitWarnings report={report} />

          <ResidualCharts summary={report.poseSummary} fitId={fit.id} fileBase={fileBase} />
          {children}
          <ParameterTable parameters={report.parameters} fileBase={fileBase} />
          <CorrelationMap report={report} fileBase={fileBase} />

          <div className="mb-6 grid gap-6 lg:grid-cols-2">
            <ObservabilityTable report={report} />
            <OutlierPoses report={report} threshold={String(fit.settings.outlierThreshold ?? 3)} canRefit={canRefit} busy={busy} onRefit={refit} />
          </div>
        </>
      )}

      {fit.state === 'fitted' && fit.reviewState === null && canSubmit && (
        <SubmitForReview implausible={implausible} canOverride={canOverride} busy={busy} onSubmit={submit} />
      )}
      {message && <p ref={messageRef} className="notice mb-4" role="status">✓ {message}</p>}
      {error && (
        <div ref={errorRef} className="notice notice-error mb-4" role="alert">
          <p className="font-semibold">✕ {error.error}</p>
          {error.errors.map((p, i) => <p key={i}>{p.field ? `${p.field}: ` : ''}{p.message}</p>)}
        </div>
      )}
    </div>
  );
}
