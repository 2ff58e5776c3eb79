/**
 * The calibration certificate of an approved parameter set as a PDF, drawn with pdfkit from plain data
 * (CertificateInput, assembled by certificate.ts from the database). Pure: no database, no clock, no random
 * numbers — the same input gives the same bytes (creation and modification dates are the approval time;
 * pdfkit derives the document ID from those).
 *
 * Fonts: Source Sans 3 (SIL Open Font License 1.1), the app's own typeface, embedded from the static TTF
 * files of the `source-sans` package (Adobe's release); nothing is fetched.
 */
import PDFDocument from 'pdfkit';
import { accuracyMap } from '../engine/accuracy-map';
import type { ArmGeometry, ErrorStats } from '../engine/types';
import type { ParameterReport } from '../engine/fit-report';
import { drawAccuracyMap, fmtMm, fmtSe, fmtValue, fmtWhen, fontFiles, GROUP_WORDS, PAGE, residualChart, Writer, type ResidualPoint, INK, SOFT } from './certificate-layout';

export { fmtMm, fmtSe, fmtValue, mapColour } from './certificate-layout';

export interface CertificateSession {
  measuredOn: string;
  technician: string;
  instrument: string;
  /** The instrument's stated uncertainty as recorded with the session; null when none was recorded. */
  statedUncertainty: string | null;
  ambientC: number | null;
  target: string;
  fileName: string;
  fileSha256: string;
  poseCount: number;
  repeatGroups: number;
}

/** A parameter row as the certificate prints it: the fit report's row, with the group as a word. */
export type CertificateParameter = Pick<
  ParameterReport,
  'key' | 'unit' | 'nominal' | 'calibrated' | 'change' | 'standardError' | 'status' | 'reason'
> & { group: string };

export interface IsoFigures {
  repeatedPoses: number;
  apBeforeMm: number | null;
  apAfterMm: number | null;
  apPose: string | null;
  rpMm: number | null;
  rpPose: string | null;
}

export interface CertificateInput {
  certificateNo: string;
  set: { id: string; version: number; approvedAt: string; comment: string };
  unit: { serial: string; site: string; cell: string };
  model: { name: string; manufacturer: string; revision: number };
  company: string;
  sessions: CertificateSession[];
  method: {
    convention: 'dh' | 'mdh';
    groups: string[];
    registration: { registered: boolean; rmsMm: number | null };
    robust: string;
    holdout: number;
    kFold: number;
    engineVersion: string;
    iterations: number;
    stopReason: string;
    fitPoses: number;
    holdoutPoses: number;
    excludedPoses: number;
  };
  results: {
    fit: { before: ErrorStats; after: ErrorStats };
    holdout: { before: ErrorStats; after: ErrorStats } | null;
    crossValidation: { k: number; rms: number } | null;
    iso: IsoFigures | null;
  };
  residuals: ResidualPoint[];
  parameters: CertificateParameter[];
  approvals: {
    runBy: string;
    submittedBy: string;
    submittedAt: string | null;
    approvedBy: string;
    approvedAt: string;
    fourEyesRule: boolean;
    fourEyesMet: boolean;
  };
  files: { name: string; bytes: number; sha256: string }[];
  nominal: ArmGeometry;
  calibrated: ArmGeometry;
  mapOptions: { samples: number; cellsPerSide: number; seed: number };
  safety: string;
}

export function fourEyesSentence(a: CertificateInput['approvals']): string {
  if (!a.fourEyesRule) return 'Four-eyes rule: switched off for this installation at approval time.';
  return a.fourEyesMet
    ? `Four-eyes rule: met — ${a.approvedBy} approved; the fit was run by ${a.runBy || 'unknown'} and submitted by ${a.submittedBy || 'unknown'}.`
    : `Four-eyes rule: approved under the administrator exception — ${a.approvedBy} also ran or submitted this fit.`;
}



export function statsRow(label: string, s: ErrorStats | undefined): string[] {
  return s ? [label, String(s.n), fmtMm(s.rms), fmtMm(s.mean), fmtMm(s.max), fmtMm(s.p95)] : [label, '–', '–', '–', '–', '–'];
}

/** Render the certificate; resolves to the PDF bytes. */
export async function renderCertificate(input: CertificateInput): Promise<Uint8Array> {
  const when = new Date(input.set.approvedAt);
  const doc = new PDFDocument({
    size: 'A4',
    margins: { top: PAGE.margin, bottom: PAGE.margin, left: PAGE.margin, right: PAGE.margin },
    bufferPages: true,
    autoFirstPage: true,
    info: {
      Title: `Calibration certificate ${input.certificateNo} — unit ${input.unit.serial}, parameter set v${input.set.version}`,
      Author: input.company,
      Subject: `Kinematic calibration of ${input.model.name} unit ${input.unit.serial}`,
      Creator: 'Offsetry',
      Producer: 'Offsetry (pdfkit)',
      CreationDate: when,
      ModDate: when,
    },
  });
  const chunks: Buffer[] = [];
  const finished = new Promise<Uint8Array>((resolve, reject) => {
    doc.on('data', (c: Buffer) => chunks.push(c));
    doc.on('end', () => resolve(new Uint8Array(Buffer.concat(chunks))));
    doc.on('error', reject);
  });
  const font = fontFiles();
  doc.registerFont('regular', font.regular);
  doc.registerFont('semibold', font.semibold);
  const w = new Writer(doc);

  // ---- title block
  doc.font('semibold').fontSize(20).fillColor(INK).text('Calibration certificate', PAGE.margin, PAGE.margin);
  doc.font('regular').fontSize(10).fillColor(SOFT).text(`Certificate number ${input.certificateNo} · issued ${fmtWhen(input.set.approvedAt)} · ${input.company}`);
  doc.moveDown(0.4);
  doc.font('regular').fontSize(9.5).fillColor(INK).text(
    `Kinematic calibration of arm unit ${input.unit.serial}: parameter set v${input.set.version}, approved ${fmtWhen(input.approvals.approvedAt)}. ` +
      'This certificate states what was measured, what changed and how well the arm model now predicts the measured positions.',
    { width: PAGE.w - 2 * PAGE.margin },
  );

  w.heading('Unit');
  w.pairs([
    ['Serial number', input.unit.serial],
    ['Arm model', `${input.model.name}${input.model.manufacturer ? ` (${input.model.manufacturer})` : ''}, revision r${input.model.revision}`],
    ['Customer site', [input.unit.site, input.unit.cell].filter(Boolean).join(', ') || '–'],
    ['Parameter set', `v${input.set.version} (${input.set.id})`],
  ]);

  w.heading(input.sessions.length > 1 ? 'Measurement sessions' : 'Measurement session');
  for (const s of input.sessions) {
    w.pairs([
      ['Measured on', s.measuredOn],
      ['Technician', s.technician || '–'],
      ['Instrument', s.instrument || '–'],
      ['Stated uncertainty', s.statedUncertainty ?? 'not recorded with the session'],
      ['Ambient temperature', s.ambientC === null ? 'not recorded' : `${s.ambientC.toFixed(1)} °C`],
      ['Target', s.target || '–'],
      ['Poses', `${s.poseCount}${s.repeatGroups ? ` (${s.repeatGroups} poses visited repeatedly)` : ''}`],
      ['Session file', s.fileName],
      ['Session file SHA-256', s.fileSha256],
    ]);
  }

  w.heading('Method');
  const m = input.method;
  const identified = input.parameters.filter((p) => p.status === 'identified');
  const fixed = input.parameters.filter((p) => p.status === 'fixed');
  w.para(
    `The arm is described by ${m.convention === 'dh' ? 'Denavit–Hartenberg (DH)' : 'modified Denavit–Hartenberg'} parameters with a base frame and a tool point. ` +
      `${m.registration.registered ? `The nominal file had no base frame, so the tracker frame was first registered to the arm model (Kabsch; RMS ${fmtMm(m.registration.rmsMm)} mm). ` : 'The base frame of the nominal file was the starting point for the base. '}` +
      `Parameter groups identified: ${m.groups.map((g) => GROUP_WORDS[g] ?? g).join(', ')}. ${identified.length} parameters were identified by Levenberg–Marquardt least squares ` +
      `(${m.robust === 'none' ? 'plain squared residuals' : `${m.robust} robust loss`}; ${m.iterations} iterations, ${m.stopReason}); ${fixed.length} were fixed at nominal because the data cannot determine them. ` +
      `${m.fitPoses} poses were fitted${m.holdoutPoses ? `, ${m.holdoutPoses} held out for validation` : ''}${m.excludedPoses ? `, ${m.excludedPoses} excluded` : ''}${m.kFold ? `; ${m.kFold}-fold cross-validation` : ''}. ` +
      `Engine ${m.engineVersion}. Sign convention of every change: change = calibrated − nominal; lengths in mm, angles in degrees.`,
    { lineGap: 0.5 },
  );
  if (fixed.length) {
    doc.moveDown(0.3);
    w.table(
      [{ title: 'Fixed at nominal', width: 110 }, { title: 'Reason', width: PAGE.w - 2 * PAGE.margin - 110 }],
      fixed.map((p) => [p.key, p.reason ?? '–']),
    );
  }

  w.heading('Results');
  const r = input.results;
  const cols = [
    { title: 'Poses', width: 165 },
    { title: 'n', width: 40, align: 'right' as const },
    { title: 'RMS (mm)', width: 75, align: 'right' as const },
    { title: 'mean (mm)', width: 75, align: 'right' as const },
    { title: 'max (mm)', width: 70, align: 'right' as const },
    { title: '95th pct (mm)', width: 70, align: 'right' as const },
  ];
  w.table(cols, [
    statsRow('Fitted poses, before (nominal)', r.fit.before),
    statsRow('Fitted poses, after (calibrated)', r.fit.after),
    ...(r.holdout ? [statsRow('Held-out poses, before (nominal)', r.holdout.before), statsRow('Held-out poses, after (calibrated)', r.holdout.after)] : []),
  ]);
  w.pairs([
    ['Held-out validation', r.holdout ? `${r.holdout.after.n} poses not used by the fit: RMS ${fmtMm(r.holdout.after.rms)} mm after calibration` : 'no poses were held out'],
    ['Cross-validation', r.crossValidation ? `${r.crossValidation.k}-fold, RMS ${fmtMm(r.crossValidation.rms)} mm` : 'not run for this fit'],
    [
      'ISO 9283 (position)',
      r.iso
        ? `${r.iso.repeatedPoses} repeated poses. Accuracy AP (worst pose ${r.iso.apPose ?? '–'}): ${fmtMm(r.iso.apBeforeMm)} mm before, ${fmtMm(r.iso.apAfterMm)} mm after; repeatability RP (worst pose ${r.iso.rpPose ?? '–'}): ${fmtMm(r.iso.rpMm)} mm.`
        : 'not computed: the session repeats no pose',
    ],
  ]);
  doc.moveDown(0.3);
  w.ensure(230);
  doc.font('semibold').fontSize(9.5).fillColor(INK).text('Residual per pose, before and after calibration', PAGE.margin);
  residualChart(w, input.residuals);

  w.heading('Accuracy map: nominal versus calibrated prediction over the workspace');
  drawAccuracyMap(w, accuracyMap(input.nominal, input.calibrated, input.mapOptions));

  w.heading('Parameters');
  const pc = [
    { title: 'Parameter', width: 62 },
    { title: 'Group', width: 92 },
    { title: 'Unit', width: 28 },
    { title: 'Nominal', width: 66, align: 'right' as const },
    { title: 'Calibrated', width: 66, align: 'right' as const },
    { title: 'Change', width: 58, align: 'right' as const },
    { title: 'Std. error', width: 52, align: 'right' as const },
    { title: 'Status', width: 71 },
  ];
  w.table(
    pc,
    input.parameters.map((p) => [p.key, GROUP_WORDS[p.group] ?? p.group, p.unit, fmtValue(p.nominal, p.unit), fmtValue(p.calibrated, p.unit), fmtValue(p.change, p.unit), fmtSe(p.standardError), p.status === 'fixed' ? 'fixed at nominal' : 'identified']),
  );
  w.para('Change = calibrated − nominal. Standard errors from the fit\'s linearised covariance (residual variance × (JᵀWJ)⁻¹), in the parameter\'s unit. The exported files carry full double precision.', { lineGap: 0.5 });

  w.heading('Approvals');
  const a = input.approvals;
  w.pairs([
    ['Fit run by', a.runBy || '–'],
    ['Submitted for review by', `${a.submittedBy || '–'}${a.submittedAt ? `, ${fmtWhen(a.submittedAt)}` : ''}`],
    ['Approved by', `${a.approvedBy}, ${fmtWhen(a.approvedAt)}`],
    ['Four eyes', fourEyesSentence(a)],
    ...(input.set.comment ? ([['Approval note', input.set.comment]] as [string, string][]) : []),
  ]);

  w.heading('Exported files of this parameter set (SHA-256)');
  w.table(
    [{ title: 'File', width: 90 }, { title: 'Bytes', width: 50, align: 'right' }, { title: 'SHA-256', width: PAGE.w - 2 * PAGE.margin - 140 }],
    input.files.map((f) => [f.name, String(f.bytes), f.sha256]),
    8,
  );
  w.para('Check a file with any SHA-256 tool (for example `sha256sum FILE`); the digests are the same however often the set is exported.');

  w.heading('Safety');
  w.para(input.safety, { lineGap: 0.5 });

  // ---- footers: certificate number and page n of N on every page
  const range = doc.bufferedPageRange();
  for (let i = range.start; i < range.start + range.count; i++) {
    doc.switchToPage(i);
    const saved = doc.page.margins.bottom;
    doc.page.margins.bottom = 0;
    doc.font('regular').fontSize(7.5).fillColor(SOFT);
    doc.text(`Offsetry calibration certificate ${input.certificateNo} · unit ${input.unit.serial} · parameter set v${input.set.version}`, PAGE.margin, PAGE.h - PAGE.margin + 12, { lineBreak: false });
    doc.text(`Page ${i - range.start + 1} of ${range.count}`, PAGE.w - PAGE.margin - 100, PAGE.h - PAGE.margin + 12, { width: 100, align: 'right', lineBreak: false });
    doc.page.margins.bottom = saved;
  }
  doc.end();
  return finished;
}
