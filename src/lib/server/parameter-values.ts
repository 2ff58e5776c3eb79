/**
 * A geometry as a flat list of parameters in file units (mm / deg), in the order screens show them
 * (groups lengths, twists, offsets, beta, base, tool; joints in order within a group). Shared by drift,
 * fleet statistics and the CSV export. Tool rotations are left out: they never move the measured point,
 * so they are never identified and have no drift or spread to speak of.
 */
import { geometryToVector, parameterLayout, toReportUnit, type ParameterInfo } from '../engine/parameters';
import { PARAMETER_GROUPS, type ArmGeometry, type ParameterGroup } from '../engine/types';

export interface ParameterValue {
  key: string;
  joint?: string;
  name: string;
  group: ParameterGroup;
  unit: 'mm' | 'deg';
  value: number;
}

const groupRank = (g: string) => {
  const i = (PARAMETER_GROUPS as readonly string[]).indexOf(g);
  return i < 0 ? PARAMETER_GROUPS.length : i;
};

/** Parameters of a geometry in display order; a joint's beta only where the geometry lists it. */
export function parameterValues(g: ArmGeometry): ParameterValue[] {
  const layout = parameterLayout(g);
  const v = geometryToVector(g);
  const keep = (p: ParameterInfo) => p.group !== 'tool-rotation' && (p.name !== 'beta' || g.joints[p.jointIndex!]?.beta !== undefined);
  return layout.params
    .filter(keep)
    .map((p, order) => ({ p, order }))
    .sort((a, b) => groupRank(a.p.group) - groupRank(b.p.group) || a.order - b.order)
    .map(({ p }) => ({ key: p.key, joint: p.joint, name: p.name, group: p.group as ParameterGroup, unit: p.unit, value: toReportUnit(p, v[p.index]!) }));
}

/** Keys of two parameter lists merged in display order (a nominal without beta, a calibrated set with it …). */
export function mergedOrder(lists: ParameterValue[][]): ParameterValue[] {
  const seen = new Map<string, ParameterValue>();
  for (const l of lists) for (const p of l) if (!seen.has(p.key)) seen.set(p.key, p);
  const jointNo = (k: string) => (k.startsWith('J') ? Number(k.slice(1, k.indexOf('.'))) : 0);
  const fieldRank = (k: string) => ['a', 'd', 'alpha', 'theta', 'beta', 'x', 'y', 'z', 'rx', 'ry', 'rz'].indexOf(k.slice(k.indexOf('.') + 1));
  return [...seen.values()].sort(
    (a, b) => groupRank(a.group) - groupRank(b.group) || jointNo(a.key) - jointNo(b.key) || fieldRank(a.key) - fieldRank(b.key),
  );
}
