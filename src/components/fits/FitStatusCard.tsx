import type { Ref } from 'react';
import { fitLabel } from '../../lib/shared/fit-label';
import type { FitView } from '../../lib/shared/fit-view';
import FitSettingsList from './FitSettingsList';
import { FIT_STATE_LABEL, mm, REVIEW_STATE_LABEL, when } from './format';

interface Props {
  fit: FitView;
  /** Queued or running: the progress line is shown. */
  waiting: boolean;
  /** The failure notice, which takes focus when a fit the page watched fails. */
  failedRef: Ref<HTMLDivElement>;
}

/** The fit's state, progress or failure, the reviewer's decision, and who ran it with which inputs and settings. */
export default function FitStatusCard({ fit, waiting, failedRef }: Props) {
  return (
    <section className="card mb-6">
      <div className="flex flex-wrap items-center gap-3">
        <span className="badge" data-state-badge>{FIT_STATE_LABEL[fit.state]}</span>
        {fit.reviewState && <span className="badge">{REVIEW_STATE_LABEL[fit.reviewState]}</span>}
        {fit.parameterSet && <a className="badge no-underline" href={`/units/${encodeURIComponent(fit.unitSerial)}`}>● parameter set v{fit.parameterSet.version} ({fit.parameterSet.state})</a>}
      </div>
      {waiting && (
        <p className="mt-3" role="status" aria-live="polite" data-fit-progress>
          {fit.state === 'queued'
            ? 'Waiting for a worker…'
            : fit.progress
              ? `Iteration ${fit.progress.iteration}, RMS ${mm(fit.progress.rmsMm)} mm`
              : 'Starting…'}
        </p>
      )}
      {fit.state === 'failed' && (
        <div ref={failedRef} className="notice notice-error mt-3" role="alert">
          <p className="font-semibold">✕ The fit failed</p>
          <p>{fit.error}</p>
        </div>
      )}
      {fit.decisionComment && (
        <p className="mt-3">
          <strong>{fit.reviewState === 'returned' ? 'Returned' : 'Decision'} by {fit.decidedByName} ({when(fit.decidedAt)}):</strong> {fit.decisionComment}
        </p>
      )}
      <dl className="mt-3 grid gap-x-6 gap-y-1 text-sm sm:grid-cols-2 lg:grid-cols-4">
        <div><dt className="text-ink-soft">Run by</dt><dd>{fit.createdByName ?? '—'} · {fitLabel(fit.createdAt, fit.id)}</dd></div>
        <div><dt className="text-ink-soft">Engine</dt><dd>{fit.engineVersion ? `v${fit.engineVersion}` : '—'}{fit.durationMs !== null ? ` · ${fit.durationMs} ms` : ''}{fit.attempts > 1 ? ` · attempt ${fit.attempts}` : ''}</dd></div>
        <div><dt className="text-ink-soft">Session file SHA-256</dt><dd className="truncate" title={fit.inputChecksums?.sessionFile}>{fit.inputChecksums?.sessionFile.slice(0, 16) ?? '—'}…</dd></div>
        <div><dt className="text-ink-soft">Nominal geometry SHA-256</dt><dd className="truncate" title={fit.inputChecksums?.nominalGeometry}>{fit.inputChecksums?.nominalGeometry.slice(0, 16) ?? '—'}…</dd></div>
        <div className="sm:col-span-2 lg:col-span-4"><dt className="text-ink-soft">Settings</dt><dd><FitSettingsList settings={fit.settings} /></dd></div>
      </dl>
    </section>
  );
}
