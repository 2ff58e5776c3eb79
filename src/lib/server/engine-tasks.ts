/**
 * Heavy engine calls that requests ask for (besides fits), run in the engine's worker threads so the
 * request thread stays free: each entry takes and returns plain, structured-cloneable data.
 */
import { checkGeometry } from '../engine/fit';
import { planPoses } from '../engine/planner';
import type { ArmGeometry } from '../engine/types';
import { jointRanges, workspaceDifference } from '../engine/workspace';
import { computeFleet } from './fleet-compute';
import { sessionDigest } from './session-digest-task';

/** Predicted position error of each nominal against its calibrated geometry (the fleet page's column). */
function positionErrors(pairs: { nominal: ArmGeometry; calibrated: ArmGeometry }[], samples: number, seed: number) {
  return pairs.map((p) => {
    const d = workspaceDifference(p.nominal, p.calibrated, jointRanges(p.nominal), { samples, seed });
    return { maxMm: d.maxMm, rmsMm: d.rmsMm };
  });
}

/** Two geometries over the workspace of `nominal`'s joint ranges (the comparison page). */
function compareWorkspace(a: ArmGeometry, b: ArmGeometry, nominal: ArmGeometry, options: Parameters<typeof workspaceDifference>[3]) {
  return workspaceDifference(a, b, jointRanges(nominal), options);
}

export const ENGINE_TASKS = {
  planPoses,
  checkGeometry,
  positionErrors,
  compareWorkspace,
  /** Fleet statistics: every unit's judgement and position error (src/lib/server/fleet-compute.ts). */
  computeFleet,
  workspaceDifference,
  /** The session page's checks and chart sample (src/lib/server/session-digest-task.ts). */
  sessionDigest,
} as const;

export type EngineTaskName = keyof typeof ENGINE_TASKS;
