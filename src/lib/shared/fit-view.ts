/**
 * The fit as the server reads it and as `GET /api/fits`, `GET /api/fits/{id}` and `GET /api/fits/{id}/poses`
 * serve it: one declaration for both sides. `When` is the type of the timestamps: `Date` on the server,
 * `string` (ISO 8601) once the value has gone through JSON to an island.
 * Types only: nothing here pulls server or engine code into a bundle.
 */
import type { FitState, ReviewState } from '../../db/schema/fits';
import type { PoseResidual } from '../engine/fit';
import type { Verdicts } from '../engine/plausibility';
import type { FitReportSummary } from './fit-summary';

/** A fit in a list: state, who ran and reviewed it, and (once fitted) its before/after RMS. */
export interface FitSummary<When = Date> {
  id: string;
  sessionId: string;
  unitId: string;
  unitSerial: string;
  sessionMeasuredOn: string;
  sessionFileName: string;
  parentFitId: string | null;
  state: FitState;
  reviewState: ReviewState | null;
  settings: Record<string, unknown>;
  progress: { iteration: number; rmsMm: number; cost: number } | null;
  error: string | null;
  engineVersion: string | null;
  attempts: number;
  durationMs: number | null;
  createdAt: When;
  startedAt: When | null;
  finishedAt: When | null;
  createdBy: string | null;
  createdByName: string | null;
  submittedBy: string | null;
  submittedByName: string | null;
  submittedAt: When | null;
  decidedBy: string | null;
  decidedByName: string | null;
  decidedAt: When | null;
  decisionComment: string | null;
  /** Worst plausibility verdict once fitted: pass, caution or implausible. */
  plausibility?: string | null;
  /** Before/after RMS of the fit poses (mm), once fitted. */
  rmsBeforeMm?: number | null;
  rmsAfterMm?: number | null;
}

/** One fit with everything: status and progress while it runs, then the report's summary. */
export interface FitDetail<When = Date> extends FitSummary<When> {
  inputChecksums: { sessionFile: string; nominalGeometry: string } | null;
  /** The report's summary (FitReportSummary): the per-pose part is served by /api/fits/{id}/poses. */
  report: Record<string, unknown> | null;
  calibrated: unknown;
  verdicts: Verdicts | null;
  submitNote: string | null;
  overrideNote: string | null;
  overrideByName: string | null;
  overrideAt: When | null;
  exclusionNote: string | null;
  /** The parameter set this fit's approval created, if any. */
  parameterSet: { id: string; version: number; state: string } | null;
}

/** The fit as GET /api/fits/{id} returns it and the fit page's island holds it (dates as ISO strings). */
export interface FitView extends Omit<FitDetail<string>, 'report'> {
  report: FitReportSummary | null;
}

/** One pose of a fit as the paged endpoint serves it (order = 1-based position in the file). */
export interface FitPoseRow extends PoseResidual {
  order: number;
}
