/**
 * Worker-thread side of a fit: a long-lived thread that runs the engine's fitSession for each fit it is
 * sent and posts progress and the result back. Loaded by src/lib/server/engine-runner.ts through tsx's
 * loader, so it runs from the source tree both under tsx (scripts/worker.ts) and inside the built app.
 */
import { parentPort } from 'node:worker_threads';
import { fitSession, type FitOptions } from '../engine/fit';
import { ENGINE_TASKS, type EngineTaskInput } from './engine-tasks';
import { EngineInputError, type ArmGeometry, type SessionPose } from '../engine/types';

export interface FitThreadInput {
  nominal: ArmGeometry;
  poses: SessionPose[];
  options: Omit<FitOptions, 'onIteration'>;
}

export type { EngineTaskInput } from './engine-tasks';

export type FitThreadMessage =
  | { type: 'ready' }
  | { type: 'iteration'; iteration: number; cost: number; rmsMm: number }
  | { type: 'done'; report: unknown }
  | { type: 'input-error'; message: string; problems: EngineInputError['problems'] }
  | { type: 'error'; message: string }
  /** Posted by the bootstrap in engine-runner.ts when this module could not be loaded. */
  | { type: 'no-start'; message: string };

const port = parentPort;
if (port) {
  const post = (m: FitThreadMessage) => port.postMessage(m);
  port.on('message', (input: FitThreadInput | EngineTaskInput) => {
    if ('task' in input) {
      // Other heavy engine work (pose plans, …): one call, its result posted back.
      try {
        const call = ENGINE_TASKS[input.task] as (...args: unknown[]) => unknown;
        post({ type: 'done', report: call(...(input.args as unknown[])) });
      } catch (err) {
        if (err instanceof EngineInputError) post({ type: 'input-error', message: err.message, problems: err.problems });
        else post({ type: 'error', message: String((err as Error)?.stack ?? err) });
      }
      return;
    }
    try {
      const report = fitSession(input.nominal, input.poses, {
        ...input.options,
        onIteration: (it) => post({ type: 'iteration', iteration: it.iteration, cost: it.cost, rmsMm: it.rmsMm }),
      });
      post({ type: 'done', report });
    } catch (err) {
      if (err instanceof EngineInputError) post({ type: 'input-error', message: err.message, problems: err.problems });
      else post({ type: 'error', message: String((err as Error)?.stack ?? err) });
    }
  });
  post({ type: 'ready' });
}
