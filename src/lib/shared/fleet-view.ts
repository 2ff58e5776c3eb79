/**
 * An arm model's fleet statistics as the server computes them (`fleetStatistics` in src/lib/server/fleet.ts)
 * and the fleet page's island draws them: one declaration for both sides. Types only.
 */
import type { ParameterGroup } from '../engine/types';

export interface FleetParameter {
  key: string;
  joint?: string;
  name: string;
  group: ParameterGroup;
  unit: 'mm' | 'deg';
  n: number;
  mean: number | null;
  /** Sample standard deviation (n − 1) of all units; null for fewer than two. */
  sd: number | null;
  median: number | null;
  robustSd: number | null;
  /** Judged at all (base frame never; tool point only for a fixed fixture; not without spread). */
  judged: boolean;
  reason?: string;
  /** Serial numbers flagged on this parameter. */
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
  /** Normal-equivalent score against the other units per judged key (the lines are ± criticalScore). */
  scores: Record<string, number>;
  /** This unit's prediction limits per judged key (file units): centre, lower, upper, p. */
  limits: Record<string, { centre: number; lower: number; upper: number; p: number }>;
  criticalScore: number;
  flagged: boolean;
  /** Keys on which this unit is out of line with the others. */
  outside: string[];
  positionError: { maxMm: number; rmsMm: number };
}

export interface FleetOutside {
  serial: string;
  key: string;
  unit: 'mm' | 'deg';
  deviation: number;
  /** This unit's prediction limits from the other units (the flagging basis). */
  lower: number;
  upper: number;
  score: number;
  p: number;
}

/** A unit's row as a snapshot stores it (the attention flag is read live from the unit when served). */
export type FleetUnitResult = Omit<FleetUnit, 'needsAttention'>;

export interface FleetStatisticsHeader {
  alpha: number;
  rule: string;
  priors: { group: ParameterGroup; parameters: number; priorDf: number | null; priorSd: number | null }[];
  judgedParameters: number;
  criticalScore: number | null;
  toolFixture: boolean;
}

export interface FleetPositionErrorSummary {
  samples: number;
  seed: number;
  frame: string;
  fleet: { maxMm: number; meanMaxMm: number; rmsMm: number } | null;
}

/** The fleet statistics without the per-unit rows: what a snapshot keeps in one row. */
export interface FleetSnapshotSummary {
  model: { id: string; name: string };
  statistics: FleetStatisticsHeader;
  unitCount: number;
  flaggedUnits: string[];
  parameters: FleetParameter[];
  /** How many (unit, parameter) pairs are out of line in the whole fleet. */
  outsideCount: number;
  positionError: FleetPositionErrorSummary;
}

/** When the figures were computed and whether a newer computation is due (the rule is in `rule`). */
export interface FleetSnapshotState {
  computedAt: string;
  durationMs: number;
  /** The model's current sets or judgement settings changed since: a new computation is queued or running. */
  pending: boolean;
  rule: string;
}

/** GET /api/arm-models/{id}/fleet: the summary, one page of units (flagged first, then by serial) and the snapshot's state. */
export interface FleetPage extends FleetSnapshotSummary {
  units: FleetUnit[];
  /** The out-of-line entries of this page's units (flagged units come first, so page 1 starts with them). */
  outside: FleetOutside[];
  unitsPage: { page: number; pageSize: number; total: number };
  snapshot: FleetSnapshotState;
}
