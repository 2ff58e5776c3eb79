/**
 * The report tasks the worker threads run (engine-runner.ts runReport): pure functions of plain data (no
 * database, no S3), so they run the same in a worker thread and in-process.
 */
import { accuracyMap, type AccuracyMap } from '../engine/accuracy-map';
import type { ArmGeometry } from '../engine/types';
import { renderCertificate, type CertificateInput } from './certificate-pdf';

export type ReportTask =
  | { kind: 'certificate'; input: CertificateInput }
  | { kind: 'accuracy-map'; nominal: ArmGeometry; calibrated: ArmGeometry };

/** The settings of every accuracy map Offsetry shows (certificate and unit page alike). */
export const MAP_OPTIONS = { samples: 40_000, cellsPerSide: 20, seed: 1 } as const;

export async function runReportTask(task: ReportTask): Promise<unknown> {
  if (task.kind === 'accuracy-map') return accuracyMap(task.nominal, task.calibrated, MAP_OPTIONS) satisfies AccuracyMap;
  return renderCertificate(task.input);
}
