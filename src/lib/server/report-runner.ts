/**
 * Runs report work (calibration certificate PDF, accuracy map) off the request thread: in a worker thread
 * that loads src/lib/server/report-thread.ts through tsx's loader, the way engine-runner.ts runs fits; up
 * to MAX_THREADS threads at once (the rest wait), idle ones kept for the next task. When the source tree or tsx is not at hand (or OFFSETRY_FIT_THREAD=off), the work runs
 * in-process as a fallback.
 */
import { existsSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import { runReportTask, type ReportTask, type ReportThreadMessage } from './report-tasks';

const THREAD_FILE = path.join('src', 'lib', 'server', 'report-thread.ts');
const MAX_THREADS = 2;
const TIMEOUT_MS = 120_000;

function projectRoot(): string | undefined {
  const candidates = [process.cwd()];
  try {
    let dir = path.dirname(fileURLToPath(import.meta.url));
    for (let i = 0; i < 8; i++) {
      candidates.push(dir);
      dir = path.dirname(dir);
    }
  } catch {
    // import.meta.url is always a file URL in Node.
  }
  return candidates.find((d) => existsSync(path.join(d, THREAD_FILE)) && existsSync(path.join(d, 'node_modules', 'tsx')));
}

let code: string | null | undefined;
function bootstrap(): string | null {
  if (code !== undefined) return code;
  code = null;
  if (process.env.OFFSETRY_FIT_THREAD === 'off') return code;
  const root = projectRoot();
  if (!root) return code;
  try {
    const tsxDir = path.join(root, 'node_modules', 'tsx');
    const pkg = JSON.parse(readFileSync(path.join(tsxDir, 'package.json'), 'utf8')) as { exports: Record<string, { import?: { default?: string } }> };
    const entry = pkg.exports['./esm/api']?.import?.default;
    if (!entry) return code;
    const target = pathToFileURL(path.join(root, THREAD_FILE)).href;
    code =
      `import(${JSON.stringify(pathToFileURL(path.join(tsxDir, entry)).href)})` +
      `.then((m) => { m.register(); return import(${JSON.stringify(target)}); })` +
      `.catch((e) => { require('node:worker_threads').parentPort.postMessage({ type: 'no-start', message: String(e && e.stack || e) }); });`;
  } catch {
    code = null;
  }
  return code;
}

let running = 0;
const waiting: (() => void)[] = [];
async function slot(): Promise<() => void> {
  if (running >= MAX_THREADS) await new Promise<void>((r) => waiting.push(r));
  running++;
  return () => {
    running--;
    waiting.shift()?.();
  };
}

class DidNotStart extends Error {}

/** Idle threads, kept (unreferenced) so a batch of certificates does not pay tsx's start-up each time. */
const idle: Worker[] = [];

function startThread(bootstrapCode: string): Promise<Worker> {
  return new Promise((resolve, reject) => {
    const worker = new Worker(bootstrapCode, { eval: true });
    const onMessage = (m: ReportThreadMessage) => {
      if (m.type === 'ready') {
        cleanup();
        resolve(worker);
      } else if (m.type === 'no-start') {
        cleanup();
        void worker.terminate();
        reject(new DidNotStart(m.message));
      }
    };
    const onError = (e: Error) => {
      cleanup();
      reject(new DidNotStart(String(e?.message ?? e)));
    };
    const cleanup = () => {
      worker.off('message', onMessage);
      worker.off('error', onError);
    };
    worker.on('message', onMessage);
    worker.on('error', onError);
  });
}

async function inThread(bootstrapCode: string, task: ReportTask): Promise<unknown> {
  const worker = idle.pop() ?? (await startThread(bootstrapCode));
  return new Promise((resolve, reject) => {
    let settled = false;
    const finish = (fn: () => void, reusable: boolean) => {
      if (settled) return;
      settled = true;
      clearTimeout(timer);
      worker.off('message', onMessage);
      worker.off('error', onError);
      worker.off('exit', onExit);
      if (reusable && idle.length < MAX_THREADS) {
        worker.unref();
        idle.push(worker);
      } else void worker.terminate();
      fn();
    };
    const timer = setTimeout(() => finish(() => reject(new Error(`the report did not finish within ${TIMEOUT_MS / 1000} s`)), false), TIMEOUT_MS);
    const onMessage = (m: ReportThreadMessage) => {
      if (m.type === 'done') finish(() => resolve(m.result), true);
      else if (m.type === 'error') finish(() => reject(new Error(m.message)), true);
    };
    const onError = (e: Error) => finish(() => reject(e), false);
    const onExit = (c: number) => finish(() => reject(new Error(`the report thread stopped (exit code ${c})`)), false);
    worker.on('message', onMessage);
    worker.on('error', onError);
    worker.on('exit', onExit);
    worker.ref();
    worker.postMessage(task);
  });
}

/** Run a report task in a worker thread (in-process when threads cannot load the source tree). */
export async function runReport<T>(task: ReportTask): Promise<T> {
  const c = bootstrap();
  if (!c) return runReportTask(task) as Promise<T>;
  const release = await slot();
  try {
    return (await inThread(c, task)) as T;
  } catch (err) {
    if (!(err instanceof DidNotStart)) throw err;
    code = null;
    return runReportTask(task) as Promise<T>;
  } finally {
    release();
  }
}
