/**
 * Runs one fit of the engine off the caller's event loop when it can: in a worker thread that loads
 * src/lib/server/fit-thread.ts through tsx's loader (the engine is synchronous, so progress can only be
 * written to the database while the fit runs if the fit runs on another thread). When the source tree or
 * tsx is not at hand (or OFFSETRY_FIT_THREAD=off), the fit runs in-process; progress is then reported once,
 * at the end.
 */
import { existsSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import { fitSession, type FitOptions, type FitReport, type IterationInfo } from '../engine/fit';
import { EngineInputError, type ArmGeometry, type SessionPose } from '../engine/types';
import { ENGINE_TASKS, type EngineTaskInput, type EngineTaskName } from './engine-tasks';
import type { FitThreadInput, FitThreadMessage } from './fit-thread';
import type { FleetComputeInput, FleetComputeResult } from './fleet-compute';
import type { WorkspaceDifference } from '../engine/workspace';
import { log } from './log';

const THREAD_FILE = path.join('src', 'lib', 'server', 'fit-thread.ts');

/** The project folder holding the source tree: the working directory, else a parent of this module. */
function projectRoot(): string | undefined {
  const candidates = [process.cwd()];
  try {
    let dir = path.dirname(fileURLToPath(import.meta.url));
    for (let i = 0; i < 8; i++) {
      candidates.push(dir);
      dir = path.dirname(dir);
    }
  } catch {
    // import.meta.url is always a file URL in Node; nothing else to try.
  }
  return candidates.find((d) => existsSync(path.join(d, THREAD_FILE)) && existsSync(path.join(d, 'node_modules', 'tsx')));
}

let threadCode: string | null | undefined;

/** The bootstrap of the thread: register tsx, then import fit-thread.ts. null when threads are unavailable. */
function bootstrap(): string | null {
  if (threadCode !== undefined) return threadCode;
  threadCode = null;
  if (process.env.OFFSETRY_FIT_THREAD === 'off') return threadCode;
  const root = projectRoot();
  if (!root) return threadCode;
  try {
    // The ESM entry of tsx's API, read from its export map (the CommonJS entry cannot register from a thread).
    const tsxDir = path.join(root, 'node_modules', 'tsx');
    const pkg = JSON.parse(readFileSync(path.join(tsxDir, 'package.json'), 'utf8')) as { exports: Record<string, { import?: { default?: string } }> };
    const entry = pkg.exports['./esm/api']?.import?.default;
    if (!entry) return threadCode;
    const tsxApi = path.join(tsxDir, entry);
    const target = pathToFileURL(path.join(root, THREAD_FILE)).href;
    threadCode =
      `import(${JSON.stringify(pathToFileURL(tsxApi).href)})` +
      `.then((m) => { m.register(); return import(${JSON.stringify(target)}); })` +
      `.catch((e) => { require('node:worker_threads').parentPort.postMessage({ type: 'no-start', message: String(e && e.stack || e) }); });`;
  } catch {
    threadCode = null;
  }
  return threadCode;
}

export type EngineMode = 'thread' | 'in-process';

export function engineMode(): EngineMode {
  return bootstrap() ? 'thread' : 'in-process';
}

export interface EngineRun {
  nominal: ArmGeometry;
  poses: SessionPose[];
  options: Omit<FitOptions, 'onIteration'>;
  onIteration?: (it: Pick<IterationInfo, 'iteration' | 'cost' | 'rmsMm'>) => void;
  /** Give up after this long (ms); the thread is terminated. */
  timeoutMs?: number;
}

/** Fit in a worker thread (or in-process as a fallback). Rejects with EngineInputError on bad input. */
export async function runEngine(run: EngineRun): Promise<FitReport> {
  const code = bootstrap();
  if (!code) return fitSession(run.nominal, run.poses, { ...run.options, onIteration: run.onIteration });
  try {
    return await inThread(code, run);
  } catch (err) {
    if (!(err instanceof ThreadDidNotStart)) throw err;
    // Threads cannot load the engine here: fall back for this and every later fit of the process.
    log('warn', 'fit threads unavailable; fits run in-process', { error: err.message });
    threadCode = null;
    return fitSession(run.nominal, run.poses, { ...run.options, onIteration: run.onIteration });
  }
}

class ThreadDidNotStart extends Error {}

/** Idle threads, kept so a fit does not pay tsx's start-up (about a second) each time. */
const idle: Worker[] = [];

function startThread(code: string): Promise<Worker> {
  return new Promise((resolve, reject) => {
    const worker = new Worker(code, { eval: true });
    const onMessage = (m: FitThreadMessage) => {
      if (m.type === 'ready') {
        cleanup();
        resolve(worker);
      } else if (m.type === 'no-start') {
        cleanup();
        void worker.terminate();
        reject(new ThreadDidNotStart(m.message));
      }
    };
    const onError = (err: Error) => {
      cleanup();
      reject(new ThreadDidNotStart(String(err?.message ?? err)));
    };
    const cleanup = () => {
      worker.off('message', onMessage);
      worker.off('error', onError);
    };
    worker.on('message', onMessage);
    worker.on('error', onError);
  });
}

async function inThread(code: string, run: EngineRun): Promise<FitReport> {
  const input: FitThreadInput = { nominal: run.nominal, poses: run.poses, options: run.options };
  return (await onThread(code, input, run.onIteration, run.timeoutMs)) as FitReport;
}

// Request-driven tasks share the threads with fits but at most TASK_THREADS run at once; the rest wait
// their turn, so a burst of heavy requests cannot start a thread each.
const TASK_THREADS = Math.max(1, Number(process.env.OFFSETRY_TASK_THREADS ?? 2));
let tasksRunning = 0;
const taskQueue: (() => void)[] = [];

/**
 * Run a heavy engine call (ENGINE_TASKS) on a worker thread and resolve with its result; in-process only
 * where threads cannot load the engine. Rejects with EngineInputError on bad input, as the call would.
 */
export async function runEngineTask<N extends EngineTaskName>(task: N, ...args: Parameters<(typeof ENGINE_TASKS)[N]>): Promise<ReturnType<(typeof ENGINE_TASKS)[N]>> {
  const direct = () => (ENGINE_TASKS[task] as (...a: unknown[]) => ReturnType<(typeof ENGINE_TASKS)[N]>)(...args);
  const code = bootstrap();
  if (!code) return direct();
  if (tasksRunning >= TASK_THREADS) await new Promise<void>((resolve) => taskQueue.push(resolve));
  tasksRunning++;
  try {
    const input: EngineTaskInput<N> = { task, args };
    return (await onThread(code, input, undefined, 5 * 60_000)) as ReturnType<(typeof ENGINE_TASKS)[N]>;
  } catch (err) {
    if (!(err instanceof ThreadDidNotStart)) throw err;
    log('warn', 'engine threads unavailable; the task runs in-process', { task, error: err.message });
    threadCode = null;
    return direct();
  } finally {
    tasksRunning--;
    taskQueue.shift()?.();
  }
}

async function onThread(code: string, input: FitThreadInput | EngineTaskInput, onIteration: EngineRun['onIteration'], timeoutMs: number | undefined): Promise<unknown> {
  const worker = idle.pop() ?? (await startThread(code));
  const run = { onIteration, timeoutMs };
  return new Promise<unknown>((resolve, reject) => {
    let settled = false;
    const finish = (fn: () => void, reusable: boolean) => {
      if (settled) return;
      settled = true;
      clearTimeout(timer);
      worker.off('message', onMessage);
      worker.off('error', onError);
      worker.off('exit', onExit);
      if (reusable && idle.length < 8) {
        worker.unref();
        idle.push(worker);
      } else void worker.terminate();
      fn();
    };
    const timer = setTimeout(
      () => finish(() => reject(new Error(`the fit did not finish within ${Math.round((run.timeoutMs ?? 600_000) / 1000)} s`)), false),
      run.timeoutMs ?? 10 * 60_000,
    );
    const onMessage = (m: FitThreadMessage) => {
      if (m.type === 'iteration') run.onIteration?.(m);
      else if (m.type === 'done') finish(() => resolve(m.report), true);
      else if (m.type === 'input-error') finish(() => reject(new EngineInputError(m.problems)), true);
      else if (m.type === 'error') finish(() => reject(new Error(m.message)), false);
    };
    const onError = (err: Error) => finish(() => reject(err), false);
    const onExit = (codeNo: number) => {
      log('warn', 'fit thread exited early', { code: codeNo });
      finish(() => reject(new Error(`the fit thread stopped (exit code ${codeNo}) before it finished`)), false);
    };
    worker.on('message', onMessage);
    worker.on('error', onError);
    worker.on('exit', onExit);
    worker.ref();
    worker.postMessage(input);
  });
}

/**
 * Fleet statistics in a worker thread (in-process as a fallback), through the same idle threads as the
 * fits: the judgement of every unit and the position errors grow with the fleet, the page must not.
 */
export async function runFleetTask(input: FleetComputeInput): Promise<FleetComputeResult> {
  return runEngineTask('computeFleet', input);
}

/** Workspace position difference of two geometries (engine workspaceDifference) off the caller's thread. */
export async function runWorkspaceDifference(input: { a: ArmGeometry; b: ArmGeometry; ranges: [number, number][]; samples: number; seed: number }): Promise<WorkspaceDifference> {
  return runEngineTask('workspaceDifference', input.a, input.b, input.ranges, { samples: input.samples, seed: input.seed });
}
