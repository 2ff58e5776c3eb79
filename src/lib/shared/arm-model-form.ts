/**
 * Arm model metadata and request shapes shared by the form island and the API. The geometry itself is
 * checked by the engine's `armGeometrySchema` (src/lib/engine/geometry.ts) on both sides; this file only
 * adds the model's own fields and turns engine problems into field problems the form can place.
 *
 * Browser-safe: no server imports.
 */
import { z } from 'zod';
import { armGeometrySchema, formatPath } from '../engine/geometry';
import { cleanText } from './input';
import type { ArmGeometry, InputProblem } from '../engine/types';

export const armModelMetaSchema = z.object({
  // Names are shown everywhere and written into exports: control and bidi characters are removed first.
  name: z.string({ error: 'name is required (text)' }).trim().overwrite((v) => cleanText(v)).min(1, 'name must not be empty').max(120, 'name is at most 120 characters'),
  manufacturer: z.string({ error: 'manufacturer must be text' }).trim().overwrite((v) => cleanText(v)).max(120, 'manufacturer is at most 120 characters').default(''),
  description: z.string({ error: 'description must be text' }).trim().overwrite((v) => cleanText(v, true)).max(2000, 'description is at most 2000 characters').default(''),
});

/** PUT: every field optional; a `note` describes the change and is kept with a new revision. */
export const armModelUpdateMetaSchema = z.strictObject({
  name: armModelMetaSchema.shape.name.optional(),
  manufacturer: armModelMetaSchema.shape.manufacturer.unwrap().optional(),
  description: armModelMetaSchema.shape.description.unwrap().optional(),
  note: z.string({ error: 'note must be text' }).trim().max(500, 'note is at most 500 characters').optional(),
  geometry: z.unknown().optional(),
});

export interface FieldIssue {
  /** Dotted path in the request: geometry.joints[2].alpha */
  field?: string;
  line?: number;
  message: string;
  expected?: string;
}

/** Validate a geometry value with the engine's schema; problems carry the path with a prefix. */
export function checkGeometryValue(value: unknown, prefix = 'geometry'): { ok: true; geometry: ArmGeometry } | { ok: false; issues: FieldIssue[] } {
  const r = armGeometrySchema.safeParse(value);
  if (r.success) return { ok: true, geometry: r.data as ArmGeometry };
  const issues: FieldIssue[] = [];
  for (const iss of r.error.issues) {
    if (iss.code === 'unrecognized_keys') {
      for (const k of iss.keys) issues.push({ field: joinPath(prefix, formatPath([...iss.path, k])), message: `unknown field "${k}"` });
      continue;
    }
    issues.push({ field: joinPath(prefix, formatPath(iss.path)), message: iss.message });
  }
  return { ok: false, issues };
}

/** Engine problems (from parseGeometry) as field issues: column is the JSON path. */
export function engineProblemsToIssues(problems: readonly InputProblem[], prefix = ''): FieldIssue[] {
  return problems.map((p) => ({
    field: p.column ? joinPath(prefix, p.column) : prefix || undefined,
    line: p.line,
    message: p.file ? `${p.file}${p.line !== undefined ? `, line ${p.line}` : ''}: ${p.message}` : p.message,
    expected: p.expected,
  }));
}

function joinPath(prefix: string, path: string): string {
  if (!prefix) return path;
  if (!path) return prefix;
  return path.startsWith('[') ? prefix + path : `${prefix}.${path}`;
}

/** Revision label as screens show it. */
export const revisionLabel = (n: number) => `r${n}`;
