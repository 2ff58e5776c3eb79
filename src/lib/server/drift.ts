/**
 * Drift: how a unit's parameters change between approved versions, tolerances per arm model and parameter
 * group, alerts raised on approval when a change exceeds its tolerance, and their acknowledgement.
 */
import { and, asc, desc, eq, isNull, sql } from 'drizzle-orm';
import { z } from 'zod';
import { armModelRevisions, armModels, driftAlerts, fits, parameterSets, units, users, type GroupTolerances } from '../../db/schema';
import type { ArmGeometry, ParameterGroup } from '../engine/types';
import { audit } from './audit';
import { config } from './config';
import { db as sharedDb, type Db } from './db';
import { composeMail, enqueueMail } from './mail';
import { parameterValues, mergedOrder, type ParameterValue } from './parameter-values';
import { recordWebhookEvent } from './webhooks';
import type { DriftParameter, DriftPoint } from '../shared/drift-view';

export type Tx = Parameters<Parameters<Db['transaction']>[0]>[0];
type Conn = Db | Tx;

/**
 * Defaults until a metrology engineer sets the model's own (mm for lengths/base/tool, deg for angles). The base
 * frame is not checked by default: each session registers the tracker where it stood that day, so the base
 * changes by metres between visits without the arm changing at all.
 */
export const DEFAULT_TOLERANCES: GroupTolerances = { lengths: 0.2, twists: 0.02, offsets: 0.02, beta: 0.02, base: null, tool: 0.2 };

const positive = (what: string, unit: string) =>
  z.number({ error: `${what} must be a number (${unit})` }).finite().positive(`${what} must be greater than 0 ${unit}`).max(1000, `${what} must be at most 1000 ${unit}`);

export const tolerancesSchema = z.strictObject({
  lengths: positive('lengths', 'mm'),
  twists: positive('twists', 'deg'),
  offsets: positive('offsets', 'deg'),
  beta: positive('beta', 'deg'),
  // null: the base frame is left out of drift checks (a tracker without a fixed mount in the cell).
  base: positive('base', 'mm').nullable(),
  tool: positive('tool', 'mm'),
});

/**
 * The tolerance that applies to one parameter. Each group's tolerance is in the group's natural unit; a
 * parameter whose unit differs from it uses the lengths (mm) or twists (deg) tolerance instead: a prismatic
 * joint's zero (group offsets, in mm) and the base rotations (group base, in deg). null: not checked.
 */
export function toleranceFor(p: { group: ParameterGroup; unit: 'mm' | 'deg' }, t: GroupTolerances): number | null {
  if (p.group === 'base' && t.base === null) return null;
  const natural: Record<ParameterGroup, 'mm' | 'deg'> = { lengths: 'mm', twists: 'deg', offsets: 'deg', beta: 'deg', base: 'mm', tool: 'mm' };
  if (natural[p.group] === p.unit) return t[p.group];
  return p.unit === 'mm' ? t.lengths : t.twists;
}

/** A change beyond this many combined standard errors is more than the two fits' uncertainty explains. */
export const SE_MULTIPLE = 3;

/** b − a; for angles wrapped into (−180°, 180°], so 179.9° → −179.9° is a change of 0.2°, not 359.8°. */
export function parameterDifference(a: number, b: number, unit: 'mm' | 'deg'): number {
  const d = b - a;
  if (unit !== 'deg') return d;
  const w = d - 360 * Math.floor((d + 180) / 360);
  return w === -180 ? 180 : w;
}

/** Combined standard error √(a² + b²) of a change between two independent fits; null when neither has one. */
export function combinedStandardError(a: number | null | undefined, b: number | null | undefined): number | null {
  if ((a === null || a === undefined) && (b === null || b === undefined)) return null;
  return Math.sqrt((a ?? 0) ** 2 + (b ?? 0) ** 2);
}

export interface ParameterChange {
  key: string;
  joint?: string;
  group: ParameterGroup;
  unit: 'mm' | 'deg';
  previous: number;
  value: number;
  change: number;
  /** null: this parameter is not checked for drift (base frame without a tolerance). */
  tolerance: number | null;
  exceeded: boolean;
  /** √(SE_before² + SE_after²); null when neither set carries a standard error. */
  combinedSe: number | null;
  /** change / combinedSe. */
  multiple: number | null;
  /** |change| > SE_MULTIPLE combined standard errors. */
  beyondSe: boolean;
}

/**
 * Parameter-by-parameter change from `before` to `after` (angles wrapped at ±180°); keys missing on one side
 * are skipped. With the two sets' standard errors, each change is also a multiple of its combined SE.
 */
export function compareGeometries(
  before: ArmGeometry,
  after: ArmGeometry,
  t: GroupTolerances,
  se: { before?: Record<string, number | null>; after?: Record<string, number | null> } = {},
): ParameterChange[] {
  const prev = new Map(parameterValues(before).map((p) => [p.key, p]));
  const out: ParameterChange[] = [];
  for (const p of parameterValues(after)) {
    const q = prev.get(p.key);
    if (!q) continue;
    const change = parameterDifference(q.value, p.value, p.unit);
    const tolerance = toleranceFor(p, t);
    const combinedSe = combinedStandardError(se.before?.[p.key], se.after?.[p.key]);
    const multiple = combinedSe && combinedSe > 0 ? change / combinedSe : null;
    out.push({
      key: p.key, joint: p.joint, group: p.group, unit: p.unit, previous: q.value, value: p.value, change, tolerance,
      exceeded: tolerance !== null && Math.abs(change) > tolerance,
      combinedSe, multiple, beyondSe: multiple !== null && Math.abs(multiple) > SE_MULTIPLE,
    });
  }
  return out;
}

/** Which limits a change crossed, in words for alerts and mails. */
export function crossedWords(c: { exceeded: boolean; beyondSe: boolean; multiple: number | null }): string {
  const se = c.multiple === null ? 'no standard error to compare' : `${Math.abs(c.multiple).toFixed(1)} combined SE`;
  if (c.exceeded && c.beyondSe) return `beyond the tolerance and beyond ${SE_MULTIPLE} combined SE (${se}): a real change`;
  if (c.exceeded) return `beyond the tolerance but within ${SE_MULTIPLE} combined SE (${se}): possibly measurement uncertainty`;
  if (c.beyondSe) return `within the tolerance, beyond ${SE_MULTIPLE} combined SE (${se})`;
  return `within the tolerance and ${SE_MULTIPLE} combined SE`;
}

export async function modelTolerances(modelId: string, database: Conn = sharedDb()) {
  const [m] = await database.select({ id: armModels.id, name: armModels.name, tolerances: armModels.tolerances }).from(armModels).where(eq(armModels.id, modelId));
  if (!m) return undefined;
  return { modelId: m.id, modelName: m.name, tolerances: { ...DEFAULT_TOLERANCES, ...(m.tolerances ?? {}) }, defaults: m.tolerances === null, defaultTolerances: DEFAULT_TOLERANCES };
}

export async function setModelTolerances(modelId: string, t: GroupTolerances, actorId: string, database: Db = sharedDb()) {
  return database.transaction(async (tx) => {
    const [before] = await tx.select({ tolerances: armModels.tolerances }).from(armModels).where(eq(armModels.id, modelId)).for('update');
    if (!before) return undefined;
    await tx.update(armModels).set({ tolerances: t }).where(eq(armModels.id, modelId));
    await audit(tx, { actorId, entityType: 'arm_model', entityId: modelId, action: 'tolerances.updated', details: { before: before.tolerances ?? DEFAULT_TOLERANCES, after: t } });
    return modelTolerances(modelId, tx);
  });
}

/** The arm model of a unit (through its revision) and its tolerances. */
async function unitModel(unitId: string, database: Conn) {
  const [row] = await database
    .select({ serial: units.serial, modelId: armModels.id, modelName: armModels.name, tolerances: armModels.tolerances })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
    .where(eq(units.id, unitId));
  return row && { ...row, tolerances: { ...DEFAULT_TOLERANCES, ...(row.tolerances ?? {}) } };
}

export interface DriftCheckOptions {
  unitId: string;
  newSetId: string;
  /** Base of the link in the mail; default PUBLIC_BASE_URL. */
  baseUrl?: string;
}

/**
 * Compare a just-approved set with the unit's previous version, inside the approval's transaction: beyond
 * tolerance ⇒ a drift alert, the unit marked for attention, and an e-mail to every active quality user
 * (queued in the same transaction, so alert and mail exist exactly when the approval does).
 * Returns the alert, or null when the set is the first version or everything is within tolerance.
 */
export async function checkDriftOnApproval(tx: Conn, options: DriftCheckOptions) {
  const [current] = await tx.select().from(parameterSets).where(eq(parameterSets.id, options.newSetId));
  if (!current || current.unitId !== options.unitId) throw new Error(`parameter set ${options.newSetId} is not a set of unit ${options.unitId}`);
  const [previous] = await tx
    .select()
    .from(parameterSets)
    .where(and(eq(parameterSets.unitId, options.unitId), sql`${parameterSets.version} < ${current.version}`))
    .orderBy(desc(parameterSets.version))
    .limit(1);
  if (!previous) return null;
  const model = await unitModel(options.unitId, tx);
  if (!model) throw new Error(`unit ${options.unitId} not found`);
  // The alert fires on the tolerance (exceeded ⇒ the parameter has one); each entry says whether the change
  // is also beyond SE_MULTIPLE combined standard errors of the two fits.
  const beyond = compareGeometries(previous.geometry, current.geometry, model.tolerances, { before: previous.standardErrors, after: current.standardErrors }).filter((c) => c.exceeded);
  if (!beyond.length) return null;
  const details = beyond.map((c) => ({
    key: c.key, change: c.change, tolerance: c.tolerance!, unit: c.unit, combinedSe: c.combinedSe, multiple: c.multiple,
    crossed: ['tolerance', ...(c.beyondSe ? ['standard-error'] : [])] as ('tolerance' | 'standard-error')[],
  }));
  const [alert] = await tx.insert(driftAlerts).values({ unitId: options.unitId, parameterSetId: current.id, previousSetId: previous.id, details }).returning();
  await tx.update(units).set({ needsAttention: true }).where(eq(units.id, options.unitId));
  await recordWebhookEvent(tx, 'drift_alert.raised', {
    alert: { id: alert!.id, parameters: details },
    unit: { id: options.unitId, serial: model.serial },
    parameterSet: { id: current.id, version: current.version },
    previousSet: { id: previous.id, version: previous.version },
  });
  await audit(tx, {
    actorId: null,
    unitId: options.unitId,
    entityType: 'alert',
    entityId: alert!.id,
    action: 'drift_alert.raised',
    details: { version: current.version, previousVersion: previous.version, parameters: details },
  });
  const quality = await tx
    .select({ email: users.email })
    .from(users)
    .where(and(eq(users.active, true), sql`'quality' = any(${users.roles})`));
  const base = (options.baseUrl ?? config().PUBLIC_BASE_URL).replace(/\/$/, '');
  const fmt = (c: (typeof details)[number]) =>
    `${c.key}: changed by ${c.change.toFixed(c.unit === 'mm' ? 3 : 4)} ${c.unit} (tolerance ${c.tolerance} ${c.unit}) — ${crossedWords({ exceeded: true, beyondSe: c.crossed.includes('standard-error'), multiple: c.multiple })}`;
  const subject = `Drift beyond tolerance on unit ${model.serial} (v${previous.version} → v${current.version})`;
  const lines = [
    `Parameter set v${current.version} of unit ${model.serial} (${model.modelName}) was approved and differs from v${previous.version} beyond the tolerance of ${details.length} parameter${details.length === 1 ? '' : 's'}:`,
    ...details.map(fmt),
    'The unit is marked for attention until someone acknowledges the alert with a comment.',
  ];
  await enqueueMail(
    tx,
    quality.map((q) => composeMail(q.email, subject, lines, { label: 'Open the drift page', url: `${base}/units/${encodeURIComponent(model.serial)}/drift` })),
  );
  return alert!;
}

const alertColumns = {
  id: driftAlerts.id,
  unitId: driftAlerts.unitId,
  serial: units.serial,
  modelId: armModels.id,
  modelName: armModels.name,
  parameterSetId: driftAlerts.parameterSetId,
  previousSetId: driftAlerts.previousSetId,
  details: driftAlerts.details,
  createdAt: driftAlerts.createdAt,
  acknowledgedAt: driftAlerts.acknowledgedAt,
  acknowledgeComment: driftAlerts.acknowledgeComment,
  acknowledgedByName: users.name,
  version: parameterSets.version,
};

function alertQuery(database: Conn) {
  return database
    .select(alertColumns)
    .from(driftAlerts)
    .innerJoin(units, eq(units.id, driftAlerts.unitId))
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
    .innerJoin(parameterSets, eq(parameterSets.id, driftAlerts.parameterSetId))
    .leftJoin(users, eq(users.id, driftAlerts.acknowledgedBy));
}

export type AlertRow = Awaited<ReturnType<typeof openAlerts>>[number];

/** Open (unacknowledged) alerts, newest first; optionally of one arm model. */
export async function openAlerts(filter: { modelId?: string } = {}, database: Conn = sharedDb()) {
  const where = filter.modelId ? and(isNull(driftAlerts.acknowledgedAt), eq(armModels.id, filter.modelId)) : isNull(driftAlerts.acknowledgedAt);
  return alertQuery(database).where(where).orderBy(desc(driftAlerts.createdAt));
}

export const acknowledgeSchema = z.strictObject({
  comment: z.string({ error: 'comment is required (what was checked or done)' }).trim().min(1, 'comment must not be empty: say what was checked or done').max(2000, 'comment must be at most 2000 characters'),
});

/** Acknowledge an alert; the unit's attention flag clears when no open alert remains. */
export async function acknowledgeAlert(alertId: string, comment: string, actorId: string, database: Db = sharedDb()) {
  return database.transaction(async (tx) => {
    const [a] = await tx.select().from(driftAlerts).where(eq(driftAlerts.id, alertId)).for('update');
    if (!a) return { ok: false as const, status: 404, error: 'No such alert.' };
    if (a.acknowledgedAt) return { ok: false as const, status: 409, error: 'This alert was already acknowledged.' };
    await tx.update(driftAlerts).set({ acknowledgedAt: sql`now()`, acknowledgedBy: actorId, acknowledgeComment: comment }).where(eq(driftAlerts.id, alertId));
    // Lock the unit so two acknowledgements of its last two alerts cannot both leave the flag set.
    await tx.select({ id: units.id }).from(units).where(eq(units.id, a.unitId)).for('update');
    const [{ open }] = (await tx
      .select({ open: sql<number>`count(*)::int` })
      .from(driftAlerts)
      .where(and(eq(driftAlerts.unitId, a.unitId), isNull(driftAlerts.acknowledgedAt)))) as [{ open: number }];
    if (open === 0) await tx.update(units).set({ needsAttention: false }).where(eq(units.id, a.unitId));
    await audit(tx, { actorId, unitId: a.unitId, entityType: 'alert', entityId: alertId, action: 'drift_alert.acknowledged', comment, details: { openAlertsLeft: open } });
    const [row] = await alertQuery(tx).where(eq(driftAlerts.id, alertId));
    return { ok: true as const, alert: row!, unitNeedsAttention: open > 0 };
  });
}

const iso = (d: Date | string) => (d instanceof Date ? d.toISOString() : new Date(d).toISOString());

/** A unit's approved sets in version order (the drift history's main query; tests EXPLAIN it). */
export function unitSetsQuery(unitId: string, database: Conn = sharedDb()) {
  return database
    .select({ id: parameterSets.id, version: parameterSets.version, state: parameterSets.state, geometry: parameterSets.geometry, standardErrors: parameterSets.standardErrors, approvedAt: parameterSets.approvedAt, approvedBy: users.name })
    .from(parameterSets)
    .innerJoin(users, eq(users.id, parameterSets.approvedBy))
    .where(eq(parameterSets.unitId, unitId))
    .orderBy(asc(parameterSets.version));
}

/**
 * A unit's drift: every parameter's history over its approved versions (and, with includeFits, every
 * fitted fit), each point with its standard error, and the change from the previous version against the
 * tolerance. Undefined when the serial is unknown.
 */
export async function unitDrift(serial: string, options: { includeFits?: boolean } = {}, database: Conn = sharedDb()) {
  const [unit] = await database
    .select({ id: units.id, serial: units.serial, needsAttention: units.needsAttention, revision: armModelRevisions.revision, nominal: armModelRevisions.geometry, modelId: armModels.id, modelName: armModels.name, tolerances: armModels.tolerances })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .innerJoin(armModels, eq(armModels.id, armModelRevisions.modelId))
    .where(eq(units.serial, serial));
  if (!unit) return undefined;
  const tolerances = { ...DEFAULT_TOLERANCES, ...(unit.tolerances ?? {}) };
  const sets = await unitSetsQuery(unit.id, database);
  const fitRows = options.includeFits
    ? await database
        .select({ id: fits.id, calibrated: fits.calibrated, report: fits.report, reviewState: fits.reviewState, finishedAt: fits.finishedAt, createdAt: fits.createdAt })
        .from(fits)
        .where(and(eq(fits.unitId, unit.id), eq(fits.state, 'fitted')))
        .orderBy(asc(fits.createdAt))
    : [];
  const nominalValues = new Map(parameterValues(unit.nominal).map((p) => [p.key, p.value]));
  const setValues = sets.map((s) => new Map(parameterValues(s.geometry).map((p) => [p.key, p])));
  const fitValues = fitRows.filter((f) => f.calibrated).map((f) => ({ f, values: new Map(parameterValues(f.calibrated!).map((p) => [p.key, p])) }));
  const order = mergedOrder([parameterValues(unit.nominal), ...setValues.map((m) => [...m.values()]), ...fitValues.map((x) => [...x.values.values()])]);
  const parameters: DriftParameter[] = order.map((p: ParameterValue) => {
    const tolerance = toleranceFor(p, tolerances);
    const points: DriftPoint[] = [];
    let prev: number | undefined;
    let prevSe: number | null = null;
    sets.forEach((s, i) => {
      const v = setValues[i]!.get(p.key);
      if (!v) return;
      const change = prev === undefined ? null : parameterDifference(prev, v.value, p.unit);
      const se = s.standardErrors[p.key] ?? null;
      const combinedSe = change === null ? null : combinedStandardError(prevSe, se);
      const multiple = change !== null && combinedSe && combinedSe > 0 ? change / combinedSe : null;
      points.push({
        kind: 'set', id: s.id, version: s.version, state: s.state, at: iso(s.approvedAt), value: v.value,
        standardError: se, change, exceeded: change !== null && tolerance !== null && Math.abs(change) > tolerance,
        combinedSe, multiple, beyondSe: multiple !== null && Math.abs(multiple) > SE_MULTIPLE,
      });
      prev = v.value;
      prevSe = se;
    });
    for (const { f, values } of fitValues) {
      const v = values.get(p.key);
      if (!v) continue;
      const reportParams = (f.report as { parameters?: { key: string; standardError: number | null }[] } | null)?.parameters;
      const se = reportParams?.find((r) => r.key === p.key)?.standardError ?? null;
      points.push({ kind: 'fit', id: f.id, version: null, state: f.reviewState ?? 'fitted', at: iso(f.finishedAt ?? f.createdAt), value: v.value, standardError: se, change: null, exceeded: false, combinedSe: null, multiple: null, beyondSe: false });
    }
    return { key: p.key, joint: p.joint, name: p.name, group: p.group, unit: p.unit, nominal: nominalValues.get(p.key) ?? null, tolerance, points };
  });
  const alerts = await alertQuery(database).where(eq(driftAlerts.unitId, unit.id)).orderBy(desc(driftAlerts.createdAt));
  return {
    unit: { id: unit.id, serial: unit.serial, needsAttention: unit.needsAttention, modelId: unit.modelId, modelName: unit.modelName, revision: unit.revision },
    tolerances,
    versions: sets.map((s) => ({ id: s.id, version: s.version, state: s.state, approvedAt: iso(s.approvedAt), approvedBy: s.approvedBy })),
    parameters,
    alerts,
  };
}

export type UnitDrift = NonNullable<Awaited<ReturnType<typeof unitDrift>>>;
