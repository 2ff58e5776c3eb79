/**
 * Engine work other than fits that runs in the engine's worker thread (src/lib/server/fit-thread.ts):
 * one named task in, one answer out. Kept apart from fit-thread.ts, whose import starts the thread side.
 */
import type { ArmGeometry } from '../engine/types';
import { workspaceDifference } from '../engine/workspace';
import { computeFleet, type FleetComputeInput } from './fleet-compute';

export type EngineTaskInput =
  | { task: 'fleet'; input: FleetComputeInput }
  | { task: 'workspace'; input: { a: ArmGeometry; b: ArmGeometry; ranges: [number, number][]; samples: number; seed: number } };

export function runTask(t: EngineTaskInput): unknown {
  if (t.task === 'fleet') return computeFleet(t.input);
  return workspaceDifference(t.input.a, t.input.b, t.input.ranges, { samples: t.input.samples, seed: t.input.seed });
}
