/**
 * Heavy engine calls that requests ask for (besides fits), run in the engine's worker threads so the
 * request thread stays free: each entry takes and returns plain, structured-cloneable data.
 */
import { planPoses } from '../engine/planner';

export const ENGINE_TASKS = {
  planPoses,
} as const;

export type EngineTaskName = keyof typeof ENGINE_TASKS;

export interface EngineTaskInput<N extends EngineTaskName = EngineTaskName> {
  task: N;
  args: Parameters<(typeof ENGINE_TASKS)[N]>;
}
