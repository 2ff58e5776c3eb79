/**
 * The services scripts/test.mjs started for this run, and ways to stop and restart them mid-test.
 *
 * Everything is addressed through the environment the harness exports (DATABASE_URL, S3_*, SMTP_*,
 * MAIL_FAKE_API_URL, BASE_URL, PG_*, OFFSETRY_APP_ENTRY, OFFSETRY_TEST_CONTROL_URL). Stopping and starting
 * goes through the harness's control API, so the harness stays the owner of every process and removes them
 * all at the end even when a test fails half-way.
 *
 * Tests that stop a shared service (PostgreSQL, S3, mail, the main app) belong in tests/faults/: the harness
 * runs those after everything else, one file at a time.
 */
import { existsSync, readFileSync } from 'node:fs';
import { poll, waitUntil } from './wait';

export interface ServiceEnv {
  databaseUrl: string;
  s3: { endpoint: string; region: string; bucket: string; accessKeyId: string; secretAccessKey: string };
  smtp: { host: string; port: number };
  mailApiUrl: string;
  baseUrl: string;
  runDir: string;
  appEntry: string;
  pg: { bin: string; data: string; port: number; socketDir: string };
}

/** A required variable, with a message that says how to get it. */
export function requireEnv(name: string): string {
  const value = process.env[name];
  if (value === undefined || value === '') {
    throw new Error(`${name} is not set: run the tests through \`npm test\` (scripts/test.mjs starts the services).`);
  }
  return value;
}

export function serviceEnv(): ServiceEnv {
  return {
    databaseUrl: requireEnv('DATABASE_URL'),
    s3: {
      endpoint: requireEnv('S3_ENDPOINT'),
      region: requireEnv('S3_REGION'),
      bucket: requireEnv('S3_BUCKET'),
      accessKeyId: requireEnv('S3_ACCESS_KEY_ID'),
      secretAccessKey: requireEnv('S3_SECRET_ACCESS_KEY'),
    },
    smtp: { host: requireEnv('SMTP_HOST'), port: Number(requireEnv('SMTP_PORT')) },
    mailApiUrl: requireEnv('MAIL_FAKE_API_URL'),
    baseUrl: requireEnv('OFFSETRY_TEST_BASE_URL'),
    runDir: requireEnv('OFFSETRY_TEST_RUN_DIR'),
    appEntry: requireEnv('OFFSETRY_APP_ENTRY'),
    pg: {
      bin: requireEnv('PG_BIN'),
      data: requireEnv('PG_DATA'),
      port: Number(requireEnv('PG_PORT')),
      socketDir: requireEnv('PG_SOCKET_DIR'),
    },
  };
}

/** True when the harness started (or found) a built app for this run. */
export async function appAvailable(): Promise<boolean> {
  const entry = process.env.OFFSETRY_APP_ENTRY;
  if (!entry) return false;
  const { existsSync } = await import('node:fs');
  return existsSync(entry);
}

async function control<T>(method: 'GET' | 'POST', path: string, body?: unknown): Promise<T> {
  const base = requireEnv('OFFSETRY_TEST_CONTROL_URL');
  const res = await fetch(new URL(path, base), {
    method,
    headers: body === undefined ? undefined : { 'content-type': 'application/json' },
    body: body === undefined ? undefined : JSON.stringify(body),
  });
  const text = await res.text();
  const parsed = text ? (JSON.parse(text) as T & { error?: string }) : ({} as T & { error?: string });
  if (!res.ok) throw new Error(`test harness: ${method} ${path} failed (${res.status}): ${parsed.error ?? text}`);
  return parsed;
}

export interface HarnessStatus {
  postgres: boolean;
  s3: boolean;
  mail: boolean;
  apps: { id: string; pid: number; url: string }[];
}

export const harnessStatus = () => control<HarnessStatus>('GET', '/status');

/** Stop the run's PostgreSQL: 'fast' rolls back open transactions; 'immediate' is like a crash. */
export const stopPostgres = (mode: 'fast' | 'immediate' = 'fast') => control<{ running: boolean }>('POST', '/postgres/stop', { mode });
/** Start it again on the same port and data (returns when it accepts connections). */
export const startPostgres = () => control<{ running: boolean }>('POST', '/postgres/start');
export const restartPostgres = () => control<{ running: boolean }>('POST', '/postgres/restart');
/** Stop / start the S3 fake (same port; stored objects survive). */
export const stopS3 = () => control<{ running: boolean }>('POST', '/s3/stop');
export const startS3 = () => control<{ running: boolean }>('POST', '/s3/start');
/** Stop / start the mail fake (same ports; captured messages survive). */
export const stopMail = () => control<{ running: boolean }>('POST', '/mail/stop');
export const startMail = () => control<{ running: boolean }>('POST', '/mail/start');

export interface AppInstance {
  id: string;
  pid: number;
  port: number;
  url: string;
  logFile: string;
  /** Stop it (SIGTERM by default; SIGKILL to simulate a crash). */
  stop(signal?: 'SIGTERM' | 'SIGINT' | 'SIGKILL'): Promise<{ stopped: boolean; code?: number | null; signal?: string | null }>;
}

export interface AppInstanceOptions {
  /** Another script to run instead of the built app (e.g. a worker); default OFFSETRY_APP_ENTRY. */
  entry?: string;
  args?: string[];
  /** Wait until it listens on its port (default true; false for processes that listen on nothing). */
  waitForPort?: boolean;
}

/**
 * Another instance of the built app on a free port, sharing the run's database, S3 and mail. Its env is
 * the run's env with PORT, PUBLIC_BASE_URL and BASE_URL set to its own address, then `env` on top.
 */
export async function startAppInstance(env: Record<string, string> = {}, options: AppInstanceOptions = {}): Promise<AppInstance> {
  const started = await control<Omit<AppInstance, 'stop'>>('POST', '/apps', {
    env,
    entry: options.entry,
    args: options.args,
    wait: options.waitForPort ?? true,
  });
  return {
    ...started,
    stop: (signal = 'SIGTERM') => control('POST', `/apps/${encodeURIComponent(started.id)}/stop`, { signal }),
  };
}

export interface WorkerOptions {
  /** WORKER_NAME: the name the worker writes into the fits it claims. Default: the worker's own. */
  name?: string;
  /** WORKER_CONCURRENCY: fits run at once. Default: the worker's own. */
  concurrency?: number;
  /** More environment on top (e.g. the queue's FIT_JOB_* timings). */
  env?: Record<string, string>;
  /** The started process is pushed here before it is waited for, so an afterAll can stop it even then. */
  started?: AppInstance[];
  /** How long to wait for its "fit worker ready" log line, ms. Default 30 000. */
  timeoutMs?: number;
}

/** A separate worker process (scripts/worker.mjs) on the run's queue, once its log says it is ready. */
export async function startWorker(options: WorkerOptions = {}): Promise<AppInstance> {
  const env: Record<string, string> = { ...options.env };
  if (options.name !== undefined) env.WORKER_NAME = options.name;
  if (options.concurrency !== undefined) env.WORKER_CONCURRENCY = String(options.concurrency);
  const worker = await startAppInstance(env, { entry: 'scripts/worker.mjs', waitForPort: false });
  options.started?.push(worker);
  const logText = () => (existsSync(worker.logFile) ? readFileSync(worker.logFile, 'utf8') : '');
  const timeoutMs = options.timeoutMs ?? 30_000;
  const ready = await poll(logText, (log) => log.includes('"msg":"fit worker ready"'), { timeoutMs, intervalMs: 200 });
  if (!ready.done) throw new Error(`worker ${options.name ?? worker.id} did not start within ${timeoutMs} ms:\n${ready.value.slice(-2000)}`);
  return worker;
}

// ---- captured mail --------------------------------------------------------------------------------------

export interface CapturedMail {
  id: string;
  from: string;
  /** Envelope recipients joined with ", " (Bcc included). */
  to: string;
  recipients: string[];
  subject: string;
  /** When the fake received it (ISO 8601). */
  date: string;
  size: number;
  text: string;
  html: string | null;
}

/** Captured messages, newest first. */
export async function capturedMail(): Promise<CapturedMail[]> {
  const res = await fetch(new URL('/messages', requireEnv('MAIL_FAKE_API_URL')));
  if (!res.ok) throw new Error(`mail fake answered ${res.status}`);
  return (await res.json()) as CapturedMail[];
}

/** The raw RFC 5322 source of a captured message. */
export async function rawMail(id: string): Promise<string> {
  const res = await fetch(new URL(`/messages/${encodeURIComponent(id)}/raw`, requireEnv('MAIL_FAKE_API_URL')));
  if (!res.ok) throw new Error(`mail fake answered ${res.status} for message ${id}`);
  return res.text();
}

/**
 * Wait for a message that `match` accepts (e.g. by recipient and subject); other test files send mail at
 * the same time, so match on something unique to your test rather than clearing the store.
 */
export async function waitForMail(match: (mail: CapturedMail) => boolean, timeoutMs = 10_000): Promise<CapturedMail> {
  const found = await waitUntil('a captured mail that matches', async () => (await capturedMail()).find(match), (m) => m !== undefined, { timeoutMs, intervalMs: 100 });
  return found!;
}
