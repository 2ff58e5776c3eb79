/**
 * The fleet view's computation, without the database: the judgement of every unit against the others
 * (src/lib/engine/fleet-judgement.ts) and each unit's predicted position error. Runs in the engine's worker
 * thread (engine-runner.ts runFleetTask), so the page and the API stay small at any fleet size.
 */
import { judgeFleet, type FleetJudgement } from '../engine/fleet-judgement';
import type { ArmGeometry } from '../engine/types';
import { jointRanges, workspaceDifference } from '../engine/workspace';
import { mergedOrder, parameterValues, type ParameterValue } from './parameter-values';

/** Joint configurations sampled per unit for the position error, and the generator's seed. */
export const POSITION_SAMPLES = 1000;
export const POSITION_SEED = 9283;

export interface FleetComputeInput {
  units: { id: string; nominal: ArmGeometry; calibrated: ArmGeometry }[];
  judgeTool: boolean;
}

export interface FleetComputeResult {
  order: Omit<ParameterValue, 'value'>[];
  deviations: Record<string, number>[];
  judgement: FleetJudgement;
  positionErrors: { maxMm: number; rmsMm: number }[];
}

/**
 * Predicted position error of the nominal geometry against the calibrated one: |p_nominal(q) − p_calibrated(q)|
 * at seeded joint configurations within the nominal's limits, both in the robot base frame (the base is
 * dropped from both: a calibrated base is where the tracker stood). The tool point is kept.
 */
export function positionError(nominal: ArmGeometry, calibrated: ArmGeometry, samples = POSITION_SAMPLES, seed = POSITION_SEED) {
  const d = workspaceDifference(nominal, calibrated, jointRanges(nominal), { samples, seed });
  return { maxMm: d.maxMm, rmsMm: d.rmsMm };
}

export function computeFleet(input: FleetComputeInput): FleetComputeResult {
  const perUnit = input.units.map((u) => {
    const nominal = new Map(parameterValues(u.nominal).map((p) => [p.key, p.value]));
    const cal = parameterValues(u.calibrated);
    const deviations: Record<string, number> = {};
    for (const p of cal) deviations[p.key] = p.value - (nominal.get(p.key) ?? 0);
    return { cal, deviations };
  });
  const order = mergedOrder(perUnit.map((u) => u.cal)).map(({ value: _v, ...rest }) => rest);
  const judgement = judgeFleet({
    parameters: order.map((p) => ({ key: p.key, unit: p.unit, group: p.group })),
    units: input.units.map((u, i) => ({ id: u.id, deviations: perUnit[i]!.deviations })),
    judgeTool: input.judgeTool,
  });
  return { order, deviations: perUnit.map((u) => u.deviations), judgement, positionErrors: input.units.map((u) => positionError(u.nominal, u.calibrated)) };
}
