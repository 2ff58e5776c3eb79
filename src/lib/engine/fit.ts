/**
 * Fit orchestration: registration → identifiability → Levenberg–Marquardt → uncertainty → validation →
 * report. The steps live in fit-problem.ts (the least squares problem, registration, parameter
 * selection), fit-uncertainty.ts, fit-residuals.ts, cross-validation.ts and fit-report.ts.
 *
 * Residuals are predicted − measured inside the solver; reports show measured − predicted (mm).
 * "Before" means the nominal geometry with the registered base (the tracker frame has to be registered
 * before any comparison is meaningful); "after" the calibrated geometry.
 */
import type { ArmGeometry, SessionPose } from './types';
import { EngineInputError } from './types';
import { compileArm, createArmData } from './kinematics';
import { poseBuffers, predictPoints } from './jacobian';
import { candidateParameters, characteristicLength, readFrame, vectorToGeometry } from './parameters';
import { observability } from './identifiability';
import { parallelAxes } from './warnings';
import { errorStats } from './stats';
import { assignRoles } from './validation';
import { checkInputs, resolveFitOptions, type FitOptions, type IterationInfo } from './fit-options';
import { identifyParameters, registerBase, selectParameters, stillJoints, subset, writeBase } from './fit-problem';
import { fitUncertainty } from './fit-uncertainty';
import { poseResiduals } from './fit-residuals';
import { crossValidate } from './cross-validation';
import { fitWarnings, outlierNames, parameterReports, uncertaintyNote, type CheckReport, type FitReport } from './fit-report';

export { checkInputs, resolveFitOptions, type FitOptions, type IterationInfo, type ResolvedFitOptions } from './fit-options';
export type { CheckReport, FitReport, ParameterReport, PoseResidual } from './fit-report';

export const ENGINE_VERSION = '1.0.0';

const now = () => performance.now();

export function fitSession(nominal: ArmGeometry, poses: SessionPose[], options: FitOptions = {}): FitReport {
  const tStart = now();
  const o = resolveFitOptions(options);
  checkInputs(nominal, poses);
  const roles = assignRoles(poses, o);
  const fitIdx: number[] = [], holdIdx: number[] = [];
  roles.forEach((r, i) => (r === 'fit' ? fitIdx : r === 'holdout' ? holdIdx : null)?.push(i));

  // 0. Parallel and nearly parallel consecutive axes: the DH common normal is ill-defined there, so the
  // link gets Hayati's β (identified like a listed one; the calibrated file carries it).
  const parallel = parallelAxes(nominal);
  const betaAdded = o.autoBeta && o.groups.includes('beta') ? parallel.filter((pa) => nominal.joints[pa.jointIndex].beta === undefined) : [];
  const working: ArmGeometry = betaAdded.length
    ? { ...nominal, joints: nominal.joints.map((j, i) => (betaAdded.some((b) => b.jointIndex === i) ? { ...j, beta: 0 } : j)) }
    : nominal;

  const model = compileArm(working);
  const data = createArmData(model);
  const n = model.n;
  const all = poseBuffers(model, poses);
  const fitPb = subset(all, n, fitIdx);
  if (fitPb.count < 3) {
    throw new EngineInputError([{ message: `only ${fitPb.count} poses are left for the fit`, expected: 'at least as many fit poses as identifiable parameters' }]);
  }

  // 1. Registration of the measurement frame (only when the nominal has no base).
  const tReg = now();
  const v0 = Float64Array.from(model.nominal);
  let registrationRms: number | null = null;
  if (!nominal.base) {
    const reg = registerBase(model, data, v0, fitPb);
    writeBase(model, v0, reg.base);
    registrationRms = reg.rms;
  }
  const registrationMs = now() - tReg;

  // 2. Identifiability at the start point, then 3. identification.
  const tId = now();
  const candidates = candidateParameters(model.layout, o.groups);
  const { selection, active, initial } = selectParameters(model, data, v0, candidates, working, fitPb, stillJoints(working, poses, fitIdx));
  const identified = selection.identified.map((c) => candidates[c]);
  const p = identified.length;
  if (fitPb.count < p) {
    throw new EngineInputError([{
      column: 'pose',
      message: `${fitPb.count} fit poses are fewer than the ${p} identifiable parameters`,
      expected: `at least ${p} fit poses`,
    }]);
  }
  const increments = data.baseIncrements;
  const iterations: IterationInfo[] = [];
  const { result, v } = identifyParameters(model, data, fitPb, v0, active, o, (it) => {
    iterations.push(it);
    options.onIteration?.(it);
  }, initial);
  const identificationMs = now() - tId;

  // 4. Uncertainty and observability at the solution.
  const tUnc = now();
  // The solver's last normal equations are those at the solution (it returns them with x).
  const A = result.A;
  const u = fitUncertainty(model, data, v, fitPb, active, A, result.cost, increments, o);
  const obs = observability(A, identified, characteristicLength(working), fitPb.count, candidates.length);
  const uncertaintyMs = now() - tUnc;

  // 5. Validation: residuals before/after, standardised residuals, cross-validation.
  const tVal = now();
  const residuals = poseResiduals(model, data, all, poses, roles, v0, v, active, A, u.unc.sigma, u.unc.covariance !== null, o.outlierThreshold);
  const { errBefore, errAfter } = residuals;
  const pick = (idx: number[], e: Float64Array) => errorStats(idx.map((i) => e[i]));
  const crossValidation = o.kFold >= 2 ? crossValidate(model, data, all, poses, fitIdx, working, candidates, v0, o) : null;
  const validationMs = now() - tVal;

  // Report.
  const calibrated = vectorToGeometry(working, v);
  const parameters = parameterReports(model, nominal, v0, v, identified, u.standardErrors, candidates, selection.fixed);
  const keys = identified.map((c) => c.key);
  const highCorrelations = u.high.map((h) => ({ a: keys[h.a], b: keys[h.b], r: h.r }));
  const fixedCount = parameters.filter((x) => x.status === 'fixed').length;
  const identifiedIndex = new Set(active);
  const warnings = fitWarnings({
    nominal, working, betaAdded, converged: result.converged, stopReason: result.stopReason,
    sigma: u.unc.sigma, noiseMm: o.noiseMm, noiseGiven: options.noiseMm !== undefined, parallel,
    isIdentified: (key) => {
      const info = model.layout.byKey.get(key);
      return info !== undefined && identifiedIndex.has(info.index);
    },
    fitQ: fitIdx.map((i) => poses[i].q),
    conditionNumber: obs.conditionNumber,
    parameters,
    highCorrelations,
    characteristicLength: characteristicLength(working),
  });

  const report: FitReport = {
    engineVersion: ENGINE_VERSION,
    convention: nominal.convention,
    options: o,
    nominal,
    calibrated,
    parameters,
    correlation: { keys, matrix: u.correlation },
    highCorrelations,
    observability: obs,
    iterations,
    stopReason: result.stopReason,
    converged: result.converged,
    statistics: {
      fit: { before: pick(fitIdx, errBefore), after: pick(fitIdx, errAfter) },
      holdout: holdIdx.length ? { before: pick(holdIdx, errBefore), after: pick(holdIdx, errAfter) } : null,
      crossValidation,
    },
    poses: residuals.poses,
    outliers: outlierNames(poses, residuals.poses, roles),
    residualSigmaMm: u.unc.sigma,
    registration: { registered: !nominal.base, rmsMm: registrationRms },
    betaAdded,
    warnings,
    uncertaintyNote: uncertaintyNote(o.robust, fixedCount, u.baseRotationStandardErrors !== null, u.baseAnglesNote),
    baseRotationStandardErrors: u.baseRotationStandardErrors,
    timing: { totalMs: 0, registrationMs, identificationMs, uncertaintyMs, validationMs },
  };
  report.timing.totalMs = now() - tStart;
  return report;
}

/**
 * Error statistics of a geometry against a session, without fitting. When the geometry has no base,
 * the measurement frame is registered first (Kabsch), so the check is meaningful.
 */
export function checkGeometry(geometry: ArmGeometry, poses: SessionPose[]): CheckReport {
  checkInputs(geometry, poses);
  const model = compileArm(geometry);
  const data = createArmData(model);
  const pb = poseBuffers(model, poses);
  const v = Float64Array.from(model.nominal);
  let registered = false;
  if (!geometry.base) {
    writeBase(model, v, registerBase(model, data, v, pb).base);
    registered = true;
  }
  const pred = new Float64Array(3 * pb.count), e = new Float64Array(pb.count);
  predictPoints(model, data, v, pb, pred, e);
  return {
    stats: errorStats(e),
    poses: poses.map((p, i) => ({
      label: p.label, line: p.line, error: e[i],
      residual: [pb.measured[3 * i] - pred[3 * i], pb.measured[3 * i + 1] - pred[3 * i + 1], pb.measured[3 * i + 2] - pred[3 * i + 2]],
    })),
    registered,
    base: readFrame(v, model.layout.baseOffset),
  };
}
