/**
 * A unit's drift as the server computes it and the drift page's island draws it (`unitDrift` in
 * src/lib/server/drift.ts): one declaration for both sides. Types only.
 */
import type { ParameterGroup } from '../engine/types';

export interface DriftPoint {
  /** 'set' = an approved version; 'fit' = a fitted (not necessarily approved) fit. */
  kind: 'set' | 'fit';
  id: string;
  version: number | null;
  state: string;
  at: string;
  value: number;
  standardError: number | null;
  /** Change from the previous approved version (sets only; angles wrapped at ±180°). */
  change: number | null;
  exceeded: boolean;
  /** Combined SE of the change and the change as a multiple of it; beyondSe: more than SE_MULTIPLE. */
  combinedSe: number | null;
  multiple: number | null;
  beyondSe: boolean;
}

export interface DriftParameter {
  key: string;
  joint?: string;
  name: string;
  group: ParameterGroup;
  unit: 'mm' | 'deg';
  nominal: number | null;
  /** null: not checked for drift. */
  tolerance: number | null;
  points: DriftPoint[];
}
