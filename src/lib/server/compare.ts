/**
 * Compare two geometries of a unit — the nominal of its model revision, an approved parameter set, or a
 * fit's calibrated geometry — parameter by parameter, and by the predicted position difference over the
 * unit's workspace: a seeded sample of joint configurations within the joint limits, max and RMS of
 * |p_A − p_B| at the measured point.
 * The workspace difference itself is the engine's (src/lib/engine/workspace.ts).
 */
import { and, eq } from 'drizzle-orm';
import { armModelRevisions, fits, parameterSets, units } from '../../db/schema';
import type { WorkspaceDifference } from '../engine/workspace';
import { geometryToVector, parameterLayout, toReportUnit } from '../engine/parameters';
import type { ArmGeometry } from '../engine/types';
import { runEngineTask } from './engine-runner';
import { db as sharedDb, type Db } from './db';
import { isUuid } from './http';
import { fitLabel } from '../shared/fit-label';

export interface GeometryRef {
  ref: string;
  label: string;
  kind: 'nominal' | 'parameter_set' | 'fit';
  geometry: ArmGeometry;
  standardErrors: Record<string, number | null>;
}

/** The geometries a unit can be compared across: nominal, each parameter set, each fitted fit. */
export async function comparisonChoices(unitId: string, database: Db = sharedDb()) {
  const sets = await database
    .select({ id: parameterSets.id, version: parameterSets.version, state: parameterSets.state })
    .from(parameterSets)
    .where(eq(parameterSets.unitId, unitId))
    .orderBy(parameterSets.version);
  const fitted = await database
    .select({ id: fits.id, createdAt: fits.createdAt })
    .from(fits)
    .where(and(eq(fits.unitId, unitId), eq(fits.state, 'fitted')))
    .orderBy(fits.createdAt);
  return [
    { ref: 'nominal', label: 'Nominal (model revision)' },
    ...sets.map((s) => ({ ref: s.id, label: `Parameter set v${s.version} (${s.state})` })),
    ...fitted.map((f) => ({ ref: `fit:${f.id}`, label: `Fit of ${fitLabel(f.createdAt, f.id)} (not approved)` })),
  ];
}

/** Resolve 'nominal', a parameter set id, or 'fit:<id>' within one unit. */
export async function resolveRef(unitId: string, ref: string, database: Db = sharedDb()): Promise<GeometryRef | { error: string }> {
  if (ref === 'nominal') {
    const [row] = await database
      .select({ geometry: armModelRevisions.geometry, revision: armModelRevisions.revision })
      .from(units)
      .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
      .where(eq(units.id, unitId));
    if (!row) return { error: 'The unit has no model revision.' };
    return { ref, label: `Nominal (r${row.revision})`, kind: 'nominal', geometry: row.geometry, standardErrors: {} };
  }
  if (ref.startsWith('fit:')) {
    const id = ref.slice(4);
    if (!isUuid(id)) return { error: `"${ref}" is not a fit reference (fit:<id>).` };
    const [row] = await database.select({ calibrated: fits.calibrated, report: fits.report, state: fits.state }).from(fits).where(and(eq(fits.id, id), eq(fits.unitId, unitId)));
    if (!row) return { error: `No fit ${id} for this unit.` };
    if (row.state !== 'fitted' || !row.calibrated) return { error: `Fit ${id} is ${row.state}; only fitted fits have a calibrated geometry.` };
    const params = (row.report as { parameters?: { key: string; standardError: number | null }[] } | null)?.parameters ?? [];
    return { ref, label: 'Fit (not approved)', kind: 'fit', geometry: row.calibrated, standardErrors: Object.fromEntries(params.map((p) => [p.key, p.standardError])) };
  }
  if (!isUuid(ref)) return { error: `"${ref}" is not a reference: use nominal, a parameter set id, or fit:<id>.` };
  const [row] = await database.select().from(parameterSets).where(and(eq(parameterSets.id, ref), eq(parameterSets.unitId, unitId)));
  if (!row) return { error: `No parameter set ${ref} for this unit.` };
  return { ref, label: `Parameter set v${row.version}`, kind: 'parameter_set', geometry: row.geometry, standardErrors: row.standardErrors };
}

export interface ParameterDifference {
  key: string;
  joint?: string;
  name: string;
  group: string;
  unit: 'mm' | 'deg';
  a: number;
  b: number;
  difference: number;
  standardErrorA: number | null;
  standardErrorB: number | null;
}

/** Parameter-by-parameter differences b − a, in report units (mm / deg), in the layout's group order. */
export function parameterDifferences(a: GeometryRef, b: GeometryRef): ParameterDifference[] {
  const layout = parameterLayout(a.geometry);
  const va = geometryToVector(a.geometry), vb = geometryToVector(b.geometry);
  const hasBeta = (g: ArmGeometry, i: number) => g.joints[i]?.beta !== undefined;
  const order = ['lengths', 'twists', 'offsets', 'beta', 'base', 'tool', 'tool-rotation'];
  return layout.params
    .filter((p) => !(p.owner === 'joint' && p.name === 'beta' && !hasBeta(a.geometry, p.jointIndex!) && !hasBeta(b.geometry, p.jointIndex!)))
    .map((p) => {
      const av = toReportUnit(p, va[p.index]!), bv = toReportUnit(p, vb[p.index]!);
      return {
        key: p.key,
        ...(p.joint !== undefined ? { joint: p.joint } : {}),
        name: p.name,
        group: p.group === 'tool-rotation' ? 'tool' : p.group,
        unit: p.unit,
        a: av,
        b: bv,
        difference: bv - av,
        standardErrorA: a.standardErrors[p.key] ?? null,
        standardErrorB: b.standardErrors[p.key] ?? null,
      };
    })
    .sort((x, y) => order.indexOf(x.group) - order.indexOf(y.group));
}

export type CompareResult =
  | { ok: true; a: Omit<GeometryRef, 'geometry' | 'standardErrors'>; b: Omit<GeometryRef, 'geometry' | 'standardErrors'>; parameters: ParameterDifference[]; workspace: WorkspaceDifference }
  | { ok: false; status: 400 | 404; error: string; errors?: { field: string; message: string }[] };

export async function compareForUnit(
  serial: string,
  refA: string,
  refB: string,
  options: { samples?: number; includeBase?: boolean } = {},
  database: Db = sharedDb(),
): Promise<CompareResult> {
  const [unit] = await database
    .select({ id: units.id, nominal: armModelRevisions.geometry })
    .from(units)
    .innerJoin(armModelRevisions, eq(armModelRevisions.id, units.modelRevisionId))
    .where(eq(units.serial, serial));
  if (!unit) return { ok: false, status: 404, error: `No unit ${serial}.` };
  const [a, b] = await Promise.all([resolveRef(unit.id, refA, database), resolveRef(unit.id, refB, database)]);
  const errors = [
    ...('error' in a ? [{ field: 'a', message: a.error }] : []),
    ...('error' in b ? [{ field: 'b', message: b.error }] : []),
  ];
  if ('error' in a || 'error' in b) return { ok: false, status: 400, error: 'Cannot compare these references.', errors };
  if (a.geometry.joints.length !== b.geometry.joints.length) {
    return { ok: false, status: 400, error: 'The two geometries have different joint counts.', errors: [{ field: 'b', message: `${b.geometry.joints.length} joints against ${a.geometry.joints.length}` }] };
  }
  // Thousands of forward-kinematics samples: on an engine thread, not the request thread.
  const workspace = await runEngineTask('compareWorkspace', a.geometry, b.geometry, unit.nominal as ArmGeometry, options);
  const strip = ({ geometry: _g, standardErrors: _s, ...rest }: GeometryRef) => rest;
  return { ok: true, a: strip(a), b: strip(b), parameters: parameterDifferences(a, b), workspace };
}

/** The unit behind a serial number with the choices its comparison page offers. */
export async function comparePageData(serial: string, database: Db = sharedDb()) {
  const [unit] = await database.select({ id: units.id, serial: units.serial }).from(units).where(eq(units.serial, serial));
  if (!unit) return undefined;
  const choices = await comparisonChoices(unit.id, database);
  const [current] = await database
    .select({ id: parameterSets.id })
    .from(parameterSets)
    .where(and(eq(parameterSets.unitId, unit.id), eq(parameterSets.state, 'current')));
  return { unit, choices, defaultB: current?.id ?? choices.at(-1)?.ref ?? 'nominal' };
}
