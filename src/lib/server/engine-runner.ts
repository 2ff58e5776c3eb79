/**
 * Heavy computations off the request thread, on the worker threads of piscina pools: fits of the engine
 * (progress posted back while they run), the heavy engine calls requests ask for (ENGINE_TASKS in
 * engine-tasks.ts) and report work (certificate PDF, accuracy map; report-tasks.ts). Each thread loads
 * src/lib/server/pool-thread.mjs, which registers tsx's loader and imports pool-tasks.ts. When the source tree
 * or tsx is not at hand (or OFFSETRY_FIT_THREAD=off), or a thread cannot load the code, the work runs
 * in-process; fit progress is then reported once, at the end.
 *
 * Two pools of the same kind: fits (as many at once as the process's fit workers take) and request tasks (at
 * most OFFSETRY_TASK_THREADS, default 2, at once; the rest wait their turn), so a burst of heavy requests
 * neither starts a thread each nor waits behind a long fit. Idle threads stay a while, so a task does not pay
 * tsx's start-up (about a second) each time; they never keep the process alive.
 */
import { existsSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { MessageChannel } from 'node:worker_threads';
import { Piscina } from 'piscina';
import type { FitOptions, FitReport } from '../engine/fit';
import { EngineInputError, type ArmGeometry, type SessionPose } from '../engine/types';
import type { WorkspaceDifference } from '../engine/workspace';
import type { ENGINE_TASKS, EngineTaskName } from './engine-tasks';
import type { FleetComputeInput, FleetComputeResult } from './fleet-compute';
import { log } from './log';
import { runPoolTask, type PoolTask, type Progress, type ThreadAnswer } from './pool-tasks';
import { packable, packPoses, unpackResiduals, type PackedResiduals } from './pose-transfer';
import type { ReportTask } from './report-tasks';

const THREAD_FILE = path.join('src', 'lib', 'server', 'pool-thread.mjs');

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

let threadFile: string | null | undefined;

/** The threads' entry file; null when the work runs in-process. */
function threadEntry(): string | null {
  if (threadFile === undefined) {
    const root = process.env.OFFSETRY_FIT_THREAD === 'off' ? undefined : projectRoot();
    threadFile = root ? path.join(root, THREAD_FILE) : null;
  }
  return threadFile;
}

export type EngineMode = 'thread' | 'in-process';

export function engineMode(): EngineMode {
  return threadEntry() ? 'thread' : 'in-process';
}

type PoolKind = 'fit' | 'task';
const TASK_THREADS = Math.max(1, Number(process.env.OFFSETRY_TASK_THREADS ?? 2));
/** The most fits a process runs at once (WORKER_CONCURRENCY's limit). */
const FIT_THREADS = 16;
const pools = new Map<PoolKind, Piscina>();

function pool(kind: PoolKind, filename: string): Piscina {
  let p = pools.get(kind);
  if (!p) {
    p = new Piscina({ filename, minThreads: 0, maxThreads: kind === 'fit' ? FIT_THREADS : TASK_THREADS, idleTimeout: 10 * 60_000 });
    pools.set(kind, p);
  }
  return p;
}

/**
 * Run one task on a thread of the `kind` pool (in-process where threads are unavailable). Rejects with
 * EngineInputError on bad input, as the call would; a task past `timeoutMs` has its thread terminated.
 */
async function run(kind: PoolKind, task: PoolTask, what: string, timeoutMs: number, onIteration?: (it: Progress) => void): Promise<unknown> {
  const filename = threadEntry();
  if (filename) {
    const channel = onIteration ? new MessageChannel() : undefined;
    channel?.port1.on('message', (it: Progress) => onIteration!(it));
    let answer: ThreadAnswer;
    try {
      answer = (await pool(kind, filename).run({ task, progress: channel?.port2 }, { transferList: channel ? [channel.port2] : [], signal: AbortSignal.timeout(timeoutMs) })) as ThreadAnswer;
    } catch (err) {
      if ((err as Error)?.name === 'AbortError') throw new Error(`${what} did not finish within ${Math.round(timeoutMs / 1000)} s`);
      throw err;
    } finally {
      channel?.port1.close();
    }
    if ('value' in answer) return answer.value;
    if ('inputError' in answer) throw new EngineInputError(answer.inputError);
    // Threads cannot load the code here: this and every later task of the process run in-process.
    log('warn', 'worker threads unavailable; heavy work runs in-process', { task: task.kind, error: answer.noStart });
    threadFile = null;
  }
  return runPoolTask(task, onIteration);
}

export interface EngineRun {
  nominal: ArmGeometry;
  poses: SessionPose[];
  options: Omit<FitOptions, 'onIteration'>;
  onIteration?: (it: Progress) => void;
  /** Give up after this long (ms, default 10 minutes); the thread is terminated. */
  timeoutMs?: number;
}

/** Fit in a worker thread (or in-process as a fallback). Rejects with EngineInputError on bad input. */
export async function runEngine(r: EngineRun): Promise<FitReport> {
  // Packed in columns for the hop to the thread and back (pose-transfer.ts); a list the layout cannot hold
  // (joint counts that differ, which the engine refuses with its own message) travels as it is.
  const packed = packable(r.poses);
  const task: PoolTask = { kind: 'fit', nominal: r.nominal, poses: packed ? packPoses(r.poses) : r.poses, options: r.options };
  const answer = await run('fit', task, 'the fit', r.timeoutMs ?? 10 * 60_000, r.onIteration);
  if (!packed) return answer as FitReport;
  const report = answer as Omit<FitReport, 'poses'> & { poses: PackedResiduals };
  return { ...report, poses: unpackResiduals(report.poses) };
}

/**
 * Run a heavy engine call (ENGINE_TASKS) on a worker thread and resolve with its result. Rejects with
 * EngineInputError on bad input, as the call would.
 */
export async function runEngineTask<N extends EngineTaskName>(task: N, ...args: Parameters<(typeof ENGINE_TASKS)[N]>): Promise<ReturnType<(typeof ENGINE_TASKS)[N]>> {
  return (await run('task', { kind: 'engine', task, args }, `the ${task} task`, 5 * 60_000)) as ReturnType<(typeof ENGINE_TASKS)[N]>;
}

/** Run a report task (certificate PDF, accuracy map) on a worker thread of the request tasks' pool. */
export async function runReport<T>(report: ReportTask): Promise<T> {
  return (await run('task', { kind: 'report', report }, 'the report', 120_000)) as T;
}

/**
 * Fleet statistics in a worker thread: the judgement of every unit and the position errors grow with the
 * fleet, the page must not.
 */
export async function runFleetTask(input: FleetComputeInput): Promise<FleetComputeResult> {
  return runEngineTask('computeFleet', input);
}

/** Workspace position difference of two geometries (engine workspaceDifference) off the caller's thread. */
export async function runWorkspaceDifference(input: { a: ArmGeometry; b: ArmGeometry; ranges: [number, number][]; samples: number; seed: number }): Promise<WorkspaceDifference> {
  return runEngineTask('workspaceDifference', input.a, input.b, input.ranges, { samples: input.samples, seed: input.seed });
}
