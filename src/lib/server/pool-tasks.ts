/**
 * The work of the runner's worker threads (src/lib/server/engine-runner.ts): a fit of the engine, one of the
 * heavy engine calls of ENGINE_TASKS, or a report task. Plain, structured-cloneable data in and out; the same
 * function runs in-process where threads are unavailable.
 */
import type { MessagePort } from 'node:worker_threads';
import { fitSession, type FitOptions, type IterationInfo } from '../engine/fit';
import { EngineInputError, type ArmGeometry, type InputProblem, type SessionPose } from '../engine/types';
import { ENGINE_TASKS, type EngineTaskName } from './engine-tasks';
import { runReportTask, type ReportTask } from './report-tasks';

export type Progress = Pick<IterationInfo, 'iteration' | 'cost' | 'rmsMm'>;

export type PoolTask =
  | { kind: 'fit'; nominal: ArmGeometry; poses: SessionPose[]; options: Omit<FitOptions, 'onIteration'> }
  | { kind: 'engine'; task: EngineTaskName; args: unknown[] }
  | { kind: 'report'; report: ReportTask };

export async function runPoolTask(task: PoolTask, onIteration?: (it: Progress) => void): Promise<unknown> {
  if (task.kind === 'fit') return fitSession(task.nominal, task.poses, { ...task.options, onIteration });
  if (task.kind === 'engine') return (ENGINE_TASKS[task.task] as (...args: unknown[]) => unknown)(...task.args);
  return runReportTask(task.report);
}

/** What a thread answers: the value, the problems of bad input, or that it could not load this module. */
export type ThreadAnswer = { value: unknown } | { inputError: InputProblem[] } | { noStart: string };

/** Thread side (the default export of pool-thread.mjs): fit progress over `progress`, bad input as data. */
export async function runInThread({ task, progress }: { task: PoolTask; progress?: MessagePort }): Promise<ThreadAnswer> {
  const onIteration = progress && ((it: Progress) => progress.postMessage({ iteration: it.iteration, cost: it.cost, rmsMm: it.rmsMm } satisfies Progress));
  try {
    return { value: await runPoolTask(task, onIteration) };
  } catch (err) {
    if (err instanceof EngineInputError) return { inputError: err.problems };
    throw err;
  } finally {
    progress?.close();
  }
}
