/**
 * What a fit reports (the stored report, the API and the CLI print it), and the pieces built from the
 * solution: one row per parameter with its reason when held at nominal, what the standard errors mean,
 * the excitation and noise warnings, and the names of flagged poses.
 */
import type { ArmGeometry, Convention, ErrorStats, FrameSpec, ParameterGroup, SessionPose } from './types';
import type { ArmModel } from './kinematics';
import { toReportUnit, type ParameterInfo } from './parameters';
import type { IdentifiabilityResult } from './identifiability';
import { excitationWarnings, noiseWarning, type FitWarning, type ParallelAxes } from './warnings';
import type { PoseRole } from './validation';
import type { CrossValidation } from './cross-validation';
import type { IterationInfo, ResolvedFitOptions } from './fit-options';

export interface ParameterReport {
  key: string;
  joint?: string;
  name: string;
  group: ParameterGroup;
  unit: 'mm' | 'deg';
  nominal: number;
  calibrated: number;
  change: number;
  standardError: number | null;
  status: 'identified' | 'fixed';
  reason?: string;
}

export interface PoseResidual {
  label: string;
  line: number;
  role: PoseRole;
  /** measured − predicted, mm. */
  before: [number, number, number];
  after: [number, number, number];
  errorBefore: number;
  errorAfter: number;
  standardised: number | null;
  outlier: boolean;
}

export interface FitReport {
  engineVersion: string;
  convention: Convention;
  options: ResolvedFitOptions;
  nominal: ArmGeometry;
  calibrated: ArmGeometry;
  parameters: ParameterReport[];
  correlation: { keys: string[]; matrix: number[][] };
  highCorrelations: { a: string; b: string; r: number }[];
  observability: {
    conditionNumber: number; O1: number; O3: number; O4: number;
    singularValues: number[]; rank: number; parameterCount: number;
  };
  iterations: IterationInfo[];
  stopReason: string;
  converged: boolean;
  statistics: {
    fit: { before: ErrorStats; after: ErrorStats };
    holdout: { before: ErrorStats; after: ErrorStats } | null;
    crossValidation: CrossValidation | null;
  };
  poses: PoseResidual[];
  /** Flagged fit and hold-out poses (already excluded ones keep their flag in `poses` only): label, or line:N when the label repeats. */
  outliers: string[];
  residualSigmaMm: number;
  /** How the base was obtained: from the nominal file, or registered (Kabsch) because the file had none. */
  registration: { registered: boolean; rmsMm: number | null };
  /** Links between parallel or nearly parallel axes where the engine added β (absent from the nominal file). */
  betaAdded: ParallelAxes[];
  /** Excitation and noise warnings (plain words, with advice); empty when nothing is wrong. */
  warnings: FitWarning[];
  /** What the standard errors mean (method, and that they are conditional on the parameters held at nominal). */
  uncertaintyNote: string;
  /**
   * Standard errors (deg) of the base orientation as small rotations about the measurement x, y, z axes
   * (the solver's coordinates: defined at every orientation). null when the base rotation was not identified.
   */
  baseRotationStandardErrors: [number, number, number] | null;
  timing: { totalMs: number; registrationMs: number; identificationMs: number; uncertaintyMs: number; validationMs: number };
}

export interface CheckReport {
  stats: ErrorStats;
  poses: { label: string; line: number; error: number; residual: [number, number, number] }[];
  registered: boolean;
  base: FrameSpec;
}

/**
 * One row per parameter of the model (betas only where the nominal lists one or the engine added one):
 * nominal (0 for a base the file does not have), calibrated and their change in report units, the
 * standard error of an identified one, the reason of a fixed one.
 */
export function parameterReports(
  model: ArmModel, nominal: ArmGeometry, v0: Float64Array, v: Float64Array,
  identified: ParameterInfo[], standardErrors: (number | null)[], candidates: ParameterInfo[], fixed: IdentifiabilityResult['fixed'],
): ParameterReport[] {
  const idPos = new Map(identified.map((c, k) => [c.index, k]));
  const fixedReason = new Map(fixed.map((f) => [f.fixed.info.index, f.fixed.reason]));
  const chosen = new Set(candidates.map((c) => c.index));
  return model.layout.params
    .filter((info) => !(info.owner === 'joint' && info.name === 'beta' && !info.defaultIdentified))
    .map((info) => {
      const k = idPos.get(info.index);
      const se = k !== undefined ? standardErrors[k] : null;
      const nominalValue = toReportUnit(info, v0[info.index]);
      const nominalFile = info.owner === 'base' && !nominal.base ? 0 : nominalValue;
      const calValue = toReportUnit(info, v[info.index]);
      const report: ParameterReport = {
        key: info.key, name: info.name, group: info.group === 'tool-rotation' ? 'tool' : info.group, unit: info.unit,
        nominal: nominalFile, calibrated: calValue, change: calValue - nominalFile,
        standardError: se === null || se === undefined ? null : toReportUnit(info, se),
        status: k !== undefined ? 'identified' : 'fixed',
      };
      if (info.joint !== undefined) report.joint = info.joint;
      if (k === undefined) report.reason = reasonFor(info, chosen, fixedReason, nominal);
      return report;
    });
}

function reasonFor(info: ParameterInfo, chosen: Set<number>, fixed: Map<number, string>, g: ArmGeometry): string {
  if (info.group === 'tool-rotation') return 'the tool rotation does not move the measured point (only positions are measured)';
  const r = fixed.get(info.index);
  if (r) return r;
  if (!chosen.has(info.index)) return info.owner === 'base' && !g.base ? 'not in the chosen parameter groups (kept at the registered base)' : 'not in the chosen parameter groups';
  return 'kept at nominal';
}

/** What the standard errors mean: the method, and that they are conditional on the parameters held at nominal. */
export function uncertaintyNote(robust: ResolvedFitOptions['robust'], fixedCount: number, baseInIncrements: boolean, baseAnglesNote: string): string {
  return [
    robust === 'none'
      ? 'Standard errors are σ̂·√diag((JᵀJ)⁻¹) at the solution (linearised least squares, σ̂² = residual sum of squares / (m − p)).'
      : `Standard errors use the sandwich estimator H⁻¹BH⁻¹·m/(m − p) for the ${robust} loss (Huber 1967; HC1 factor of MacKinnon & White 1985), so down-weighted poses do not make them optimistic.`,
    `They are conditional on the ${fixedCount} parameter${fixedCount === 1 ? '' : 's'} held at nominal: those are treated as exactly known, and any error in them is not included.`,
    baseInIncrements ? 'The base orientation is solved as small rotations about the measurement axes and converted to the file\'s Z-Y-X angles for output.' : '',
  ].filter(Boolean).join(' ') + baseAnglesNote;
}

export interface WarningInputs {
  nominal: ArmGeometry;
  /** The geometry fitted (the nominal with any β the engine added). */
  working: ArmGeometry;
  betaAdded: ParallelAxes[];
  converged: boolean;
  stopReason: string;
  /** Residual σ̂ (mm). */
  sigma: number;
  noiseMm: number;
  /** The instrument noise was given (not the default). */
  noiseGiven: boolean;
  parallel: ParallelAxes[];
  isIdentified: (key: string) => boolean;
  /** Joint readings of the fit poses. */
  fitQ: number[][];
  conditionNumber: number;
  parameters: ParameterReport[];
  highCorrelations: FitReport['highCorrelations'];
  characteristicLength: number;
}

/** Warnings: β added, not converged, noise (how well the model fits) and excitation (how well the poses determine the parameters). */
export function fitWarnings(w: WarningInputs): FitWarning[] {
  const warnings: FitWarning[] = [];
  for (const b of w.betaAdded) {
    warnings.push({
      code: 'beta-added', severity: 'info', subjects: [b.key],
      message: `${b.reason[0].toUpperCase()}${b.reason.slice(1)}: the nominal lists no β there, and the DH common normal of (nearly) parallel axes is ill-defined (Hayati's rule).`,
      advice: `The calibrated file carries ${b.key}; list "beta": 0 for ${w.nominal.joints[b.jointIndex].name} in the nominal to make this explicit.`,
    });
  }
  if (!w.converged) {
    warnings.push({ code: 'not-converged', severity: 'serious', message: `The solver did not converge: ${w.stopReason}.`, advice: 'Do not use this result. Check the nominal geometry and the session, or raise the iteration limit.' });
  }
  const noise = noiseWarning(w.sigma, w.noiseMm, w.noiseGiven, w.parallel, w.isIdentified);
  if (noise) warnings.push(noise);
  warnings.push(...excitationWarnings({
    geometry: w.working,
    q: w.fitQ,
    conditionNumber: w.conditionNumber,
    parameters: w.parameters.filter((x) => x.status === 'identified'),
    highCorrelations: w.highCorrelations,
    characteristicLength: w.characteristicLength,
    noiseMm: w.noiseMm,
  }));
  return warnings;
}

/** Flagged fit and hold-out poses: the label, or line:N when the label repeats (label counts only when some pose is flagged). */
export function outlierNames(poses: SessionPose[], reports: PoseResidual[], roles: PoseRole[]): string[] {
  const flagged = poses.filter((_, i) => reports[i].outlier && roles[i] !== 'excluded');
  if (flagged.length === 0) return [];
  const counts = new Map<string, number>();
  for (const p of poses) counts.set(p.label, (counts.get(p.label) ?? 0) + 1);
  return flagged.map((p) => (counts.get(p.label) === 1 ? p.label : `line:${p.line}`));
}
