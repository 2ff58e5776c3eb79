/**
 * The process's job queue (pg-boss over PostgreSQL): started once, shared by the fit jobs (jobs.ts), the
 * webhook deliveries (webhooks.ts) and compensations, and stopped with the fit worker.
 */
import PgBoss from 'pg-boss';
import { z } from 'zod';
import { config } from './config';
import { log } from './log';

export const FIT_QUEUE = 'fit';
export const FIT_RETRY_LIMIT = 3;

/**
 * Timing of the queue. Defaults suit production; tests of crashed workers shorten them through the
 * environment (FIT_JOB_EXPIRE_SECONDS, FIT_JOB_MAINTENANCE_SECONDS, FIT_JOB_POLL_SECONDS).
 */
const timingSchema = z.object({
  FIT_JOB_EXPIRE_SECONDS: z.coerce.number().int().min(5).max(24 * 3600).default(15 * 60),
  FIT_JOB_MAINTENANCE_SECONDS: z.coerce.number().int().min(1).max(3600).default(30),
  FIT_JOB_POLL_SECONDS: z.coerce.number().min(0.5).max(60).default(1),
  FIT_JOB_RETRY_DELAY_SECONDS: z.coerce.number().int().min(0).max(600).default(2),
});
export function timing() {
  const env = Object.fromEntries(Object.entries(process.env).filter(([k, v]) => k.startsWith('FIT_JOB_') && v !== ''));
  const parsed = timingSchema.safeParse(env);
  if (!parsed.success) {
    throw new Error(`Fit job settings are invalid:\n  ${parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('\n  ')}`);
  }
  return parsed.data;
}


let bossStart: Promise<PgBoss> | undefined;

/** The process's pg-boss instance (started once; a failed start is retried on the next call). */
export function jobQueue(): Promise<PgBoss> {
  bossStart ??= (async () => {
    const t = timing();
    const boss = new PgBoss({
      connectionString: config().DATABASE_URL,
      max: 4,
      application_name: 'offsetry-jobs',
      schedule: false,
      supervise: true,
      maintenanceIntervalSeconds: t.FIT_JOB_MAINTENANCE_SECONDS,
    });
    boss.on('error', (err) => log('warn', 'job queue error', { error: String(err?.message ?? err) }));
    await boss.start();
    await ensureQueue(boss, {
      name: FIT_QUEUE,
      // One created / retry / active job per fit id (singletonKey = fit id): a fit is queued once.
      policy: 'stately',
      retryLimit: FIT_RETRY_LIMIT,
      retryDelay: t.FIT_JOB_RETRY_DELAY_SECONDS,
      expireInSeconds: t.FIT_JOB_EXPIRE_SECONDS,
    });
    return boss;
  })();
  bossStart.catch(() => (bossStart = undefined));
  return bossStart;
}

/** Stop the queue connection (waits for running jobs up to timeoutMs); the next jobQueue() starts it again. */
export async function stopJobQueue(timeoutMs: number): Promise<void> {
  const pending = bossStart;
  bossStart = undefined;
  if (!pending) return;
  const boss = await pending.catch(() => undefined);
  if (!boss) return;
  await boss.stop({ graceful: true, wait: true, timeout: timeoutMs, close: true }).catch(() => {});
}

const ensured = new WeakMap<PgBoss, Map<string, Promise<void>>>();
const creating = new WeakMap<PgBoss, Promise<void>>();

/**
 * Create a queue of this process's pg-boss unless it exists (another process may create it at the same
 * moment), and give it these settings. Once per queue and pg-boss instance; a failure is retried next call.
 */
export function ensureQueue(boss: PgBoss, queue: PgBoss.Queue): Promise<void> {
  const done = ensured.get(boss) ?? new Map<string, Promise<void>>();
  ensured.set(boss, done);
  let promise = done.get(queue.name);
  if (!promise) {
    // One queue is created at a time per pg-boss instance: concurrent createQueue calls (each makes a
    // partition of pg-boss's job table) deadlock in PostgreSQL.
    const previous = creating.get(boss) ?? Promise.resolve();
    promise = previous.catch(() => {}).then(async () => {
      if (!(await boss.getQueue(queue.name))) {
        try {
          await boss.createQueue(queue.name, queue);
        } catch (err) {
          if (!(await boss.getQueue(queue.name))) throw err;
        }
      }
      await boss.updateQueue(queue.name, queue);
    });
    creating.set(boss, promise);
    done.set(queue.name, promise);
    promise.catch(() => done.delete(queue.name));
  }
  return promise;
}

/**
 * Start a queue's workers with `start`, again every 5 s while it fails (PostgreSQL away); resolves once it
 * succeeded. `what` names them in the log.
 */
export async function startWhenReady(what: string, start: () => Promise<void>): Promise<void> {
  for (;;) {
    try {
      await start();
      return;
    } catch (err) {
      log('warn', `${what} could not start; retrying in 5 s`, { error: String((err as Error)?.message ?? err) });
      await new Promise((r) => setTimeout(r, 5000).unref());
    }
  }
}

