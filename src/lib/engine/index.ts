/**
 * Offsetry calibration engine: the public surface for endpoints, job workers, the CLI and islands.
 * Pure TypeScript (no Astro, database or server imports in the numerical modules).
 */
export * from './types';
export * from './layout';
export * from './parameters';
export * from './linalg';
export * from './random';
export * from './kinematics';
export * from './jacobian';
export * from './registration';
export * from './lm';
export * from './identifiability';
export * from './uncertainty';
export * from './stats';
export * from './validation';
export { jointRanges, workspaceDifference, type WorkspaceDifference } from './workspace';
export * from './fit';
export * from './fit-problem';
export * from './planner';
export * from './geometry';
export * from './session-csv';
export * from './iso9283';
export * from './warnings';
export * from './rotations';
export * from './ik';
export * from './ik-status';
export * from './compensate';
export * from './program-csv';
