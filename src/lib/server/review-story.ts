/**
 * What a reviewer needs to see of a fit, in one read: the submitter's note, the lineage (parent fits, who
 * excluded which poses and why, every setting that differs from the parent), the plausibility verdicts and
 * any override, the difference to the unit's current parameter set (changes with their combined standard
 * errors, and the workspace position difference, computed in the engine's thread), and the poses left out.
 */
import { and, desc, eq } from 'drizzle-orm';
import { auditLog, parameterSets } from '../../db/schema';
import type { FitReport } from '../engine/fit';
import type { ArmGeometry } from '../engine/types';
import { jointRanges } from '../engine/workspace';
import { db as sharedDb, type Db } from './db';
import { runWorkspaceDifference } from './engine-runner';
import { allFitPoses } from './fit-poses';
import { getFit } from './fits';
import type { FitDetail } from '../shared/fit-view';
import { parameterValues } from './parameter-values';

export const STORY_SAMPLES = 1000;
export const STORY_SEED = 9283;

export interface LineageStep {
  id: string;
  createdAt: Date;
  createdByName: string | null;
  /** Poses this fit excludes beyond its parent's, and the note given with them. */
  addedExclusions: string[];
  exclusionNote: string | null;
  /** Settings (other than the exclusions) that differ from the parent: key, parent's value, this fit's. */
  changedSettings: { key: string; parent: unknown; value: unknown }[];
  /** Settings kept from the parent (names). */
  keptSettings: string[];
  rmsAfterMm: number | null;
}

export interface SetDifference {
  version: number;
  approvedAt: Date;
  parameters: { key: string; unit: 'mm' | 'deg'; current: number; fitted: number; change: number; combinedSe: number | null; multiple: number | null }[];
  workspace: { maxMm: number; rmsMm: number; samples: number; seed: number };
}

const same = (a: unknown, b: unknown) => JSON.stringify(a) === JSON.stringify(b);

function exclusionsOf(settings: Record<string, unknown> | null | undefined): string[] {
  return Array.isArray(settings?.exclude) ? (settings!.exclude as string[]) : [];
}

/** The chain of fits from the oldest ancestor to this one (at most 20 steps). */
export async function lineage(fit: FitDetail, database: Db = sharedDb()): Promise<LineageStep[]> {
  const chain: FitDetail[] = [fit];
  while (chain.length < 20 && chain[0]!.parentFitId) {
    const parent = await getFit(chain[0]!.parentFitId, database);
    if (!parent) break;
    chain.unshift(parent);
  }
  return chain.map((f, i) => {
    const parent = i > 0 ? chain[i - 1]! : null;
    const mine = exclusionsOf(f.settings);
    const theirs = new Set(parent ? exclusionsOf(parent.settings) : []);
    const keys = [...new Set([...Object.keys(f.settings ?? {}), ...Object.keys(parent?.settings ?? {})])].filter((k) => k !== 'exclude');
    return {
      id: f.id,
      createdAt: f.createdAt,
      createdByName: f.createdByName,
      addedExclusions: mine.filter((e) => !theirs.has(e)),
      exclusionNote: f.exclusionNote,
      changedSettings: parent ? keys.filter((k) => !same(parent.settings[k], f.settings[k])).map((k) => ({ key: k, parent: parent.settings[k] ?? null, value: f.settings[k] ?? null })) : [],
      keptSettings: parent ? keys.filter((k) => same(parent.settings[k], f.settings[k])) : [],
      rmsAfterMm: f.rmsAfterMm ?? null,
    };
  });
}

async function setDifference(fit: FitDetail, report: FitReport, database: Db): Promise<SetDifference | null> {
  const [current] = await database
    .select({ id: parameterSets.id, version: parameterSets.version, approvedAt: parameterSets.approvedAt, geometry: parameterSets.geometry, standardErrors: parameterSets.standardErrors, fitId: parameterSets.fitId })
    .from(parameterSets)
    .where(and(eq(parameterSets.unitId, fit.unitId), eq(parameterSets.state, 'current')));
  if (!current || current.fitId === fit.id || !fit.calibrated) return null;
  const cur = new Map(parameterValues(current.geometry).map((p) => [p.key, p]));
  const se = new Map(report.parameters.map((p) => [p.key, p.status === 'identified' ? p.standardError : null]));
  const parameters = parameterValues(fit.calibrated as ArmGeometry)
    // The base frame is where the tracker stood at each visit, not a change of the arm.
    .filter((p) => p.group !== 'base' && cur.has(p.key))
    .map((p) => {
      const c = cur.get(p.key)!;
      const change = p.value - c.value;
      const a = se.get(p.key) ?? null, b = current.standardErrors[p.key] ?? null;
      const combinedSe = a !== null || b !== null ? Math.sqrt((a ?? 0) ** 2 + (b ?? 0) ** 2) : null;
      return { key: p.key, unit: p.unit, current: c.value, fitted: p.value, change, combinedSe, multiple: combinedSe && combinedSe > 0 ? change / combinedSe : null };
    })
    .filter((p) => Math.abs(p.change) > 1e-12 || p.combinedSe);
  const d = await runWorkspaceDifference({ a: current.geometry, b: fit.calibrated as ArmGeometry, ranges: jointRanges(report.nominal), samples: STORY_SAMPLES, seed: STORY_SEED });
  return { version: current.version, approvedAt: current.approvedAt, parameters, workspace: { maxMm: d.maxMm, rmsMm: d.rmsMm, samples: STORY_SAMPLES, seed: STORY_SEED } };
}

export async function reviewStory(fitId: string, database: Db = sharedDb()) {
  const fit = await getFit(fitId, database);
  if (!fit) return undefined;
  const report = fit.report as FitReport | null;
  let submitNote = fit.submitNote;
  if (!submitNote && fit.submittedAt) {
    // Fits submitted before the note had its own column: the submission's audit comment.
    const [row] = await database
      .select({ comment: auditLog.comment })
      .from(auditLog)
      .where(and(eq(auditLog.entityId, fit.id), eq(auditLog.action, 'fit.submitted')))
      .orderBy(desc(auditLog.at))
      .limit(1);
    submitNote = row?.comment ?? null;
  }
  // Per-pose results live in fit_poses (reports stored before that carry them inline).
  const poses = report ? (report.poses ?? (await allFitPoses(fit.id, database))) : [];
  const excluded = poses.filter((p) => p.role === 'excluded').map((p) => ({ label: p.label, line: p.line, errorAfter: p.errorAfter, standardised: p.standardised }));
  return {
    fit,
    report,
    submitNote,
    lineage: await lineage(fit, database),
    excluded,
    difference: report ? await setDifference(fit, report, database) : null,
  };
}

export type ReviewStory = NonNullable<Awaited<ReturnType<typeof reviewStory>>>;
