/**
 * The work of the runner's worker threads (src/lib/server/engine-runner.ts): a fit of the engine, one of the
 * heavy engine calls of ENGINE_TASKS, or a report task. Plain, structured-cloneable data in and out; the same
 * function runs in-process where threads are unavailable.
 */
import type { MessagePort } from 'node:worker_threads';
import { fitSession, type FitOptions, type IterationInfo } from '../engine/fit';
import { EngineInputError, type ArmGeometry, type InputProblem, type SessionPose } from '../engine/types';
import { ENGINE_TASKS, type EngineTaskName } from './engine-tasks';
import { packResiduals, unpackPoses, type PackedPoses } from './pose-transfer';
import { runReportTask, type ReportTask } from './report-tasks';

export type Progress = Pick<IterationInfo, 'iteration' | 'cost' | 'rmsMm'>;

export type PoolTask =
  /** Poses packed in columns (pose-transfer.ts) come back with the report's poses packed too. */
  | { kind: 'fit'; nominal: ArmGeometry; poses: SessionPose[] | PackedPoses; options: Omit<FitOptions, 'onIteration'> }
  | { kind: 'engine'; task: EngineTaskName; args: unknown[] }
  | { kind: 'report'; report: ReportTask };

export async function runPoolTask(task: PoolTask, onIteration?: (it: Progress) => void): Promise<unknown> {
  if (task.kind === 'fit') {
    if (Array.isArray(task.poses)) return fitSession(task.nominal, task.poses, { ...task.options, onIteration });
    const report = fitSession(task.nominal, unpackPoses(task.poses), { ...task.options, onIteration });
    return { ...report, poses: packResiduals(report.poses) };
  }
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
