/**
 * Fleet statistics of one arm model: each unit's CURRENT approved set as deviations from nominal, every
 * unit judged against the others (src/lib/engine/fleet-judgement.ts: robust reference, moderated Student-t
 * prediction limits, Bonferroni across the unit's parameters; base frame never, tool point only for a
 * fixed fixture), a units × parameters matrix of scores, and the predicted position error of using the
 * nominal geometry instead of each unit's calibrated one. The computation runs in the engine's worker
 * thread (engine-runner.ts); this module only reads the rows and shapes the answer.
 */
import { and, asc, eq, inArray, sql } from 'drizzle-orm';
import { armModelRevisions, armModels, fits, parameterSets, sessions, units, users } from '../../db/schema';
import { FLEET_ALPHA } from '../engine/fleet-judgement';
import { db as sharedDb, type Db } from './db';
import { runFleetTask } from './engine-runner';
import { POSITION_SAMPLES, POSITION_SEED } from './fleet-compute';
import { modelJudgement } from './judgement';
import type { FleetOutside, FleetParameter, FleetUnit } from '../shared/fleet-view';

export { positionError, POSITION_SAMPLES, POSITION_SEED } from './fleet-compute';

/** The fleet statistics of an arm model; undefined when the model does not exist. */
export async function fleetStatistics(modelId: string, database: Db = sharedDb()) {
  const [model] = await database.select({ id: armModels.id, name: armModels.name }).from(armModels).where(eq(armModels.id, modelId));
  if (!model) return undefined;
  const settings = (await modelJudgement(modelId, database))!.settings;
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
  const computed = await runFleetTask({ units: rows.map((r) => ({ id: r.unitId, nominal: r.nominal, calibrated: r.calibrated })), judgeTool: settings.toolFixture });
  const j = computed.judgement;
  const outsideList: FleetOutside[] = [];
  const fleetUnits: FleetUnit[] = rows.map((r, i) => {
    const uj = j.units[i]!;
    const scores: FleetUnit['scores'] = {};
    const limits: FleetUnit['limits'] = {};
    for (const [key, pj] of Object.entries(uj.parameters)) {
      scores[key] = pj.score;
      limits[key] = { centre: pj.centre, lower: pj.lower, upper: pj.upper, p: pj.p };
    }
    const deviations = computed.deviations[i]!;
    for (const key of uj.flags) {
      const pj = uj.parameters[key]!;
      const unit = computed.order.find((p) => p.key === key)!.unit;
      outsideList.push({ serial: r.serial, key, unit, deviation: deviations[key]!, lower: pj.lower, upper: pj.upper, score: pj.score, p: pj.p });
    }
    return {
      unitId: r.unitId,
      serial: r.serial,
      needsAttention: r.needsAttention,
      setId: r.setId,
      version: r.version,
      approvedAt: new Date(r.approvedAt).toISOString(),
      approvedBy: r.approvedBy,
      revision: r.revision,
      deviations,
      scores,
      limits,
      criticalScore: uj.criticalScore,
      flagged: uj.flagged,
      outside: uj.flags,
      positionError: computed.positionErrors[i]!,
    };
  });
  const parameters: FleetParameter[] = computed.order.map((p) => {
    const jp = j.parameters.find((x) => x.key === p.key)!;
    return {
      key: p.key, joint: p.joint, name: p.name, group: p.group, unit: p.unit,
      n: jp.n, mean: jp.mean, sd: jp.sd, median: jp.median, robustSd: jp.robustSd, judged: jp.judged, ...(jp.reason ? { reason: jp.reason } : {}),
      outside: fleetUnits.filter((u) => u.outside.includes(p.key)).map((u) => u.serial),
    };
  });
  const errs = fleetUnits.map((u) => u.positionError);
  const mean = (v: number[]) => v.reduce((a, b) => a + b, 0) / v.length;
  return {
    model,
    statistics: {
      alpha: j.alpha,
      rule: j.rule,
      priors: j.priors,
      judgedParameters: parameters.filter((p) => p.judged).length,
      criticalScore: fleetUnits.length ? Math.max(...fleetUnits.map((u) => u.criticalScore)) : null,
      toolFixture: settings.toolFixture,
    },
    unitCount: fleetUnits.length,
    flaggedUnits: fleetUnits.filter((u) => u.flagged).map((u) => u.serial),
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
            meanMaxMm: mean(errs.map((e) => e.maxMm)),
            // RMS over every sampled configuration of every unit (same sample count per unit).
            rmsMm: Math.sqrt(mean(errs.map((e) => e.rmsMm * e.rmsMm))),
          }
        : null,
    },
  };
}

/** Unit-level false-alarm rate the rule is built for (shown on the page). */
export const FLEET_FALSE_ALARM = FLEET_ALPHA;

export type FleetStatistics = NonNullable<Awaited<ReturnType<typeof fleetStatistics>>>;

/** Arm models with their unit and current-set counts, for the fleet index (counted in the database). */
export async function fleetModels(database: Db = sharedDb()) {
  const models = await database.select({ id: armModels.id, name: armModels.name }).from(armModels).orderBy(asc(armModels.name));
  const counts = await database
    .select({
      modelId: armModelRevisions.modelId,
      units: sql<number>`count(*)`.mapWith(Number),
      withCurrentSet: sql<number>`count(${parameterSets.id})`.mapWith(Number),
      needsAttention: sql<number>`count(*) filter (where ${units.needsAttention})`.mapWith(Number),
    })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .leftJoin(parameterSets, and(eq(parameterSets.unitId, units.id), eq(parameterSets.state, 'current')))
    .groupBy(armModelRevisions.modelId);
  const byModel = new Map(counts.map((c) => [c.modelId, c]));
  return models.map((m) => {
    const c = byModel.get(m.id);
    return { ...m, units: c?.units ?? 0, withCurrentSet: c?.withCurrentSet ?? 0, needsAttention: c?.needsAttention ?? 0 };
  });
}
