import type { FitReport } from '../../lib/engine/fit';
import type { FitWarning } from '../../lib/engine/warnings';
import { HIGH_CORRELATION } from '../../lib/engine/thresholds';

/**
 * The engine's warnings about a fit (excitation and noise), each with its rule and what to do. Kept apart
 * from the plausibility verdicts so both can stand side by side. Reports of engine versions before the
 * warnings existed carry none: the section then says so instead of claiming all is well.
 */
const LOOK: Record<FitWarning['severity'], { className: string; icon: string; word: string }> = {
  serious: { className: 'notice notice-error', icon: '✕', word: 'Serious' },
  warning: { className: 'notice notice-attention', icon: '▲', word: 'Warning' },
  info: { className: 'notice', icon: '●', word: 'Note' },
};

export default function FitWarnings({ report }: { report: Omit<FitReport, 'poses'> }) {
  const warnings = report.warnings as FitWarning[] | undefined;
  const order = { serious: 0, warning: 1, info: 2 } as const;
  const sorted = (warnings ?? []).slice().sort((a, b) => order[a.severity] - order[b.severity]);
  const counted = sorted.filter((w) => w.severity !== 'info').length;
  return (
    <section className="card mb-6" data-fit-warnings aria-labelledby="fit-warnings-title">
      <h2 id="fit-warnings-title" className="mb-1">Warnings about this fit</h2>
      {warnings === undefined ? (
        <p className="text-sm text-ink-soft">This fit was computed by an engine version that did not check the excitation and the residual spread; fit again to get the checks.</p>
      ) : (
        <>
          <p className="mb-3 text-sm text-ink-soft">
            {counted === 0 ? 'No warning. ' : `${counted} warning${counted === 1 ? '' : 's'}. `}
            Rules checked: every joint moves over at least 25 % of its range; condition number at most 1000; standard errors within the arm's limits
            (lengths max(0.05 mm, 2 × noise); angles that move the tool point by no more than that); at most 3 strongly correlated pairs (|r| &gt; {HIGH_CORRELATION});
            residual spread at most 2 × the instrument noise ({report.options.noiseMm ?? 0.05} mm per coordinate).
          </p>
          {sorted.length > 0 && (
            <ul className="grid gap-3">
              {sorted.map((w, k) => {
                const look = LOOK[w.severity] ?? LOOK.warning;
                return (
                  <li key={`${w.code}-${k}`} className={look.className} data-warning={w.code} data-severity={w.severity}>
                    <p className="font-semibold"><span aria-hidden="true">{look.icon}</span> {look.word}: <span className="font-normal">{w.message}</span></p>
                    <p className="mt-1 text-sm"><strong>What to do:</strong> {w.advice}</p>
                  </li>
                );
              })}
            </ul>
          )}
          {report.uncertaintyNote && <p className="mt-3 text-sm text-ink-soft" data-uncertainty-note>{report.uncertaintyNote}</p>}
        </>
      )}
    </section>
  );
}
