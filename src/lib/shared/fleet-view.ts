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
