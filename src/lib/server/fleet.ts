/**
 * Fleet statistics of one arm model: for every parameter, the spread of the deviation from nominal across
 * all units' CURRENT approved sets, control limits, the units outside them, a units × parameters matrix in
 * σ, and the predicted position error of using the nominal geometry instead of each unit's calibrated one.
 *
 * Statistics (simple-statistics): mean, SAMPLE standard deviation (n − 1 in the denominator), control
 * limits mean ± 3σ (Shewhart's three-sigma limits, common practice).
 *
 * Which units are "outside the limits": a unit is flagged for a parameter when its deviation lies outside
 * the ±3σ limits of the OTHER units (leave-one-out). With the unit itself included no unit could ever be
 * flagged in a small fleet: by Samuelson's inequality |x_i − mean| ≤ (n − 1)/√n · s, which stays under 3 s
 * for n ≤ 10. Leaving the unit out is the usual remedy (a "deleted" statistic, common practice); a unit
 * outside the all-unit limits is always outside its leave-one-out limits too. Needs at least two other
 * units. The reported limits per parameter are those of all units.
 */
import { and, asc, eq, inArray } from 'drizzle-orm';
import { mean as ssMean, sampleStandardDeviation } from 'simple-statistics';
import { armModelRevisions, armModels, fits, parameterSets, sessions, units, users } from '../../db/schema';
import { jointRanges, workspaceDifference } from '../engine/workspace';
import type { ArmGeometry, ParameterGroup } from '../engine/types';
import { runEngineTask } from './engine-runner';
import { db as sharedDb, type Db } from './db';
import { mergedOrder, parameterValues } from './parameter-values';

/** Control limits at mean ± K·σ. */
export const SIGMA_LIMIT = 3;
/** Deviations closer than this (mm or deg) to the others' mean are never flagged: rounding, not spread. */
const FLAG_FLOOR = 1e-9;
/** Joint configurations sampled per unit for the position error, and the generator's seed. */
export const POSITION_SAMPLES = 1000;
export const POSITION_SEED = 9283;

export interface SpreadStats {
  n: number;
  mean: number | null;
  /** Sample standard deviation (n − 1); null for fewer than two values. */
  sd: number | null;
  lower: number | null;
  upper: number | null;
}

/** mean, sample σ and mean ± 3σ of a list of deviations. */
export function spread(values: number[]): SpreadStats {
  const n = values.length;
  if (n === 0) return { n, mean: null, sd: null, lower: null, upper: null };
  const m = ssMean(values);
  if (n < 2) return { n, mean: m, sd: null, lower: null, upper: null };
  const sd = sampleStandardDeviation(values);
  return { n, mean: m, sd, lower: m - SIGMA_LIMIT * sd, upper: m + SIGMA_LIMIT * sd };
}

/** Leave-one-out check of value i: outside the others' mean ± 3σ? Null when fewer than two others. */
export function outsideOthers(values: number[], i: number): { outside: boolean; lower: number; upper: number } | null {
  const others = values.filter((_, k) => k !== i);
  const s = spread(others);
  if (s.sd === null) return null;
  const dev = Math.abs(values[i]! - s.mean!);
  return { outside: dev > SIGMA_LIMIT * s.sd && dev > FLAG_FLOOR, lower: s.lower!, upper: s.upper! };
}

/**
 * Predicted position error of the nominal geometry against the calibrated one: |p_nominal(q) − p_calibrated(q)|
 * at seeded joint configurations within the nominal's limits (the engine's `jointRanges`). Both in the robot base frame: the base is dropped from both, since a calibrated base
 * is where the tracker stood, not a property of the arm. The tool point is kept (it is the measured point).
 */
export function positionError(nominal: ArmGeometry, calibrated: ArmGeometry, samples = POSITION_SAMPLES, seed = POSITION_SEED) {
  const d = workspaceDifference(nominal, calibrated, jointRanges(nominal), { samples, seed });
  return { maxMm: d.maxMm, rmsMm: d.rmsMm };
}

export interface FleetParameter extends SpreadStats {
  key: string;
  joint?: string;
  name: string;
  group: ParameterGroup;
  unit: 'mm' | 'deg';
  /** Serial numbers flagged outside the limits (leave-one-out, see above). */
  outside: string[];
}

export interface FleetUnit {
  unitId: string;
  serial: string;
  needsAttention: boolean;
  setId: string;
  version: number;
  approvedAt: string;
  approvedBy: string;
  revision: number;
  /** calibrated − nominal per key, file units. */
  deviations: Record<string, number>;
  /** (deviation − fleet mean) / fleet σ per key; null when σ is 0 or undefined. */
  sigmas: Record<string, number | null>;
  /** Keys for which this unit is outside the limits. */
  outside: string[];
  positionError: { maxMm: number; rmsMm: number };
}

export interface FleetOutside {
  serial: string;
  key: string;
  unit: 'mm' | 'deg';
  deviation: number;
  /** Limits of the other units (the flagging basis). */
  lower: number;
  upper: number;
  sigma: number | null;
}

/** The fleet statistics of an arm model; undefined when the model does not exist. */
export async function fleetStatistics(modelId: string, database: Db = sharedDb()) {
  const [model] = await database.select({ id: armModels.id, name: armModels.name }).from(armModels).where(eq(armModels.id, modelId));
  if (!model) return undefined;
  const revisionIds = (await database.select({ id: armModelRevisions.id }).from(armModelRevisions).where(eq(armModelRevisions.modelId, modelId))).map((r) => r.id);
  const rows = revisionIds.length
    ? await database
        .select({
          unitId: units.id,
          serial: units.serial,
          needsAttention: units.needsAttention,
          setId: parameterSets.id,
          version: parameterSets.version,
          approvedAt: parameterSets.approvedAt,
          approvedBy: users.name,
          calibrated: parameterSets.geometry,
          nominal: armModelRevisions.geometry,
          revision: armModelRevisions.revision,
        })
        .from(units)
        .innerJoin(parameterSets, and(eq(parameterSets.unitId, units.id), eq(parameterSets.state, 'current')))
        .innerJoin(users, eq(users.id, parameterSets.approvedBy))
        .innerJoin(fits, eq(fits.id, parameterSets.fitId))
        .innerJoin(sessions, eq(sessions.id, fits.sessionId))
        // The nominal a set deviates from is the revision its fit was made against.
        .innerJoin(armModelRevisions, eq(armModelRevisions.id, sessions.modelRevisionId))
        .where(inArray(units.modelRevisionId, revisionIds))
        .orderBy(asc(units.serial))
    : [];
  const perUnit = rows.map((r) => {
    const nominal = new Map(parameterValues(r.nominal).map((p) => [p.key, p.value]));
    const cal = parameterValues(r.calibrated);
    const deviations: Record<string, number> = {};
    for (const p of cal) deviations[p.key] = p.value - (nominal.get(p.key) ?? 0);
    return { r, cal, deviations };
  });
  const order = mergedOrder(perUnit.map((u) => u.cal));
  const outsideList: FleetOutside[] = [];
  const sigmas = perUnit.map(() => ({}) as Record<string, number | null>);
  const outsideKeys = perUnit.map(() => [] as string[]);
  const parameters: FleetParameter[] = order.map((p) => {
    const holders = perUnit.map((u, i) => ({ i, v: u.deviations[p.key] })).filter((x): x is { i: number; v: number } => x.v !== undefined);
    const values = holders.map((h) => h.v);
    const s = spread(values);
    const flagged: string[] = [];
    holders.forEach((h, k) => {
      const z = s.sd && s.sd > 0 ? (h.v - s.mean!) / s.sd : null;
      sigmas[h.i]![p.key] = z;
      const check = outsideOthers(values, k);
      if (check?.outside) {
        const serial = perUnit[h.i]!.r.serial;
        flagged.push(serial);
        outsideKeys[h.i]!.push(p.key);
        outsideList.push({ serial, key: p.key, unit: p.unit, deviation: h.v, lower: check.lower, upper: check.upper, sigma: z });
      }
    });
    return { key: p.key, joint: p.joint, name: p.name, group: p.group, unit: p.unit, ...s, outside: flagged };
  });
  // Every unit's position error over 1000 workspace samples: on an engine thread, in one task.
  const positionErrors = await runEngineTask('positionErrors', perUnit.map((u) => ({ nominal: u.r.nominal, calibrated: u.r.calibrated })), POSITION_SAMPLES, POSITION_SEED);
  const fleetUnits: FleetUnit[] = perUnit.map((u, i) => ({
    unitId: u.r.unitId,
    serial: u.r.serial,
    needsAttention: u.r.needsAttention,
    setId: u.r.setId,
    version: u.r.version,
    approvedAt: new Date(u.r.approvedAt).toISOString(),
    approvedBy: u.r.approvedBy,
    revision: u.r.revision,
    deviations: u.deviations,
    sigmas: sigmas[i]!,
    outside: outsideKeys[i]!,
    positionError: positionErrors[i]!,
  }));
  const errs = fleetUnits.map((u) => u.positionError);
  return {
    model,
    statistics: {
      standardDeviation: 'sample (n − 1)',
      limits: `mean ± ${SIGMA_LIMIT}σ of all units' current sets`,
      flagging: `a unit is outside when its deviation lies outside the mean ± ${SIGMA_LIMIT}σ of the other units (needs ≥ 2 others)`,
    },
    unitCount: fleetUnits.length,
    parameters,
    units: fleetUnits,
    outside: outsideList,
    positionError: {
      samples: POSITION_SAMPLES,
      seed: POSITION_SEED,
      frame: 'robot base (base frame dropped from both geometries), tool point included',
      fleet: errs.length
        ? {
            maxMm: Math.max(...errs.map((e) => e.maxMm)),
            meanMaxMm: ssMean(errs.map((e) => e.maxMm)),
            // RMS over every sampled configuration of every unit (same sample count per unit).
            rmsMm: Math.sqrt(ssMean(errs.map((e) => e.rmsMm * e.rmsMm))),
          }
        : null,
    },
  };
}

export type FleetStatistics = NonNullable<Awaited<ReturnType<typeof fleetStatistics>>>;

/** Arm models with their unit and current-set counts, for the fleet index. */
export async function fleetModels(database: Db = sharedDb()) {
  const models = await database.select({ id: armModels.id, name: armModels.name }).from(armModels).orderBy(asc(armModels.name));
  const counts = await database
    .select({ modelId: armModelRevisions.modelId, unitId: units.id, needsAttention: units.needsAttention, setId: parameterSets.id })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .leftJoin(parameterSets, and(eq(parameterSets.unitId, units.id), eq(parameterSets.state, 'current')));
  return models.map((m) => {
    const mine = counts.filter((c) => c.modelId === m.id);
    return { ...m, units: mine.length, withCurrentSet: mine.filter((c) => c.setId).length, needsAttention: mine.filter((c) => c.needsAttention).length };
  });
}
