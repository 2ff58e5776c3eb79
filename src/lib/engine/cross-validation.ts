/**
 * k-fold cross-validation of a fit: the fit poses are split by label into k folds (validation.ts); each
 * fold is predicted by the parameters identified on the others, with the identifiability selection
 * repeated on the training poses, so the held-out fold has no say in which parameters are identified
 * (otherwise the estimate is optimistic).
 */
import type { ArmGeometry, ErrorStats, SessionPose } from './types';
import { EngineInputError } from './types';
import type { ArmData, ArmModel } from './kinematics';
import { predictPoints, type PoseBuffers } from './jacobian';
import type { ParameterInfo } from './parameters';
import { errorStats } from './stats';
import { kFoldAssignment } from './validation';
import { identifyParameters, selectParameters, stillJoints, subset } from './fit-problem';
import type { ResolvedFitOptions } from './fit-options';

export interface CrossValidation {
  k: number;
  /** RMS of the 3-D errors of every held-out pose (mm). */
  rms: number;
  folds: ErrorStats[];
}

/**
 * Cross-validation over the fit poses `fitIdx` of `all` (o.kFold ≥ 2 folds), each fold starting from v0
 * over the `candidates` of `geometry`. Leaves data.baseIncrements as it found it.
 */
export function crossValidate(
  model: ArmModel, data: ArmData, all: PoseBuffers, poses: SessionPose[], fitIdx: number[],
  geometry: ArmGeometry, candidates: ParameterInfo[], v0: Float64Array, o: ResolvedFitOptions,
): CrossValidation {
  const n = model.n;
  const increments = data.baseIncrements;
  const folds = kFoldAssignment(fitIdx.map((i) => poses[i].label), o.kFold, o.seed);
  const foldStats: ErrorStats[] = [];
  let sum2 = 0, count = 0;
  for (let f = 0; f < o.kFold; f++) {
    const train = fitIdx.filter((_, k) => folds[k] !== f);
    const test = fitIdx.filter((_, k) => folds[k] === f);
    const trainPb = subset(all, n, train);
    const fold = selectParameters(model, data, v0, candidates, geometry, trainPb, stillJoints(geometry, poses, train));
    if (train.length < fold.active.length || test.length === 0) {
      throw new EngineInputError([{ column: 'kFold', message: `${o.kFold}-fold cross-validation leaves ${train.length} training poses in fold ${f + 1}, fewer than the ${fold.active.length} identifiable parameters`, expected: 'fewer folds or more poses' }]);
    }
    const fr = identifyParameters(model, data, trainPb, v0, fold.active, o, undefined, fold.initial);
    const testPb = subset(all, n, test);
    const pred = new Float64Array(3 * testPb.count), e = new Float64Array(testPb.count);
    predictPoints(model, data, fr.v, testPb, pred, e);
    foldStats.push(errorStats(e));
    for (const x of e) sum2 += x * x;
    count += e.length;
  }
  data.baseIncrements = increments;
  return { k: o.kFold, rms: Math.sqrt(sum2 / count), folds: foldStats };
}
