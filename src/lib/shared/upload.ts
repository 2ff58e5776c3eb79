/**
 * What the session upload endpoints (`POST /api/sessions`, `POST /api/sessions/uploads`) answer, as the
 * server builds it and the upload form reads it: one declaration for both sides. Types only.
 */
import type { InputProblem } from '../engine/types';

/** One problem with an upload, naming the file, line and field where it can. */
export interface UploadProblem {
  file?: string;
  line?: number;
  column?: string;
  field?: string;
  message: string;
  expected?: string;
}

export interface UploadRefusal {
  error: string;
  errors: UploadProblem[];
  /** True when more problems exist than are listed. */
  truncated?: boolean;
  /** Set when the only obstacle is joint readings outside the model's limits (send allowOutsideLimits=true). */
  outsideLimits?: boolean;
  existing?: { id: string; url: string };
}

export interface UploadAccepted {
  id: string;
  url: string;
  poseCount: number;
  warnings: InputProblem[];
}
