// `npm run worker`: a fit worker process. It shares the fit jobs in PostgreSQL with every app instance
// (RUN_WORKER=true) and every other worker; run as many as the machine's cores allow.
//   WORKER_CONCURRENCY  fits run at once by this process (default 1; each fit runs on its own thread)
// Configuration comes from the environment (.env is read when DATABASE_URL is not set), like the app.
import { existsSync } from 'node:fs';

if (!process.env.DATABASE_URL && existsSync('.env')) process.loadEnvFile('.env');

const { configProblems } = await import('../src/lib/server/config');
const problems = configProblems();
if (problems.length) {
  console.error(`worker: configuration is incomplete:\n  ${problems.join('\n  ')}`);
  process.exit(1);
}
const { startWorker, stopWorker } = await import('../src/lib/server/jobs');
const { engineMode } = await import('../src/lib/server/engine-runner');
const { log } = await import('../src/lib/server/log');

const concurrency = Number(process.env.WORKER_CONCURRENCY ?? 1);
if (!Number.isInteger(concurrency) || concurrency < 1 || concurrency > 16) {
  console.error(`worker: WORKER_CONCURRENCY must be a whole number from 1 to 16 (got "${process.env.WORKER_CONCURRENCY}")`);
  process.exit(1);
}

let stopping = false;
async function stop(signal: string) {
  if (stopping) return;
  stopping = true;
  log('info', 'fit worker stopping', { signal });
  await stopWorker();
  process.exit(0);
}
process.on('SIGTERM', () => void stop('SIGTERM'));
process.on('SIGINT', () => void stop('SIGINT'));

await startWorker({ concurrency });
// The worker also sends signed webhooks (the queue is shared, so any process may send any delivery).
(await import('../src/lib/server/webhooks')).startWebhookSender();
await (await import('../src/lib/server/compensations')).startCompensationWorker();
// And computes the fleet statistics' snapshots.
await (await import('../src/lib/server/fleet-snapshots')).startFleetSnapshotWorker();
log('info', 'fit worker ready', { pid: process.pid, concurrency, engine: engineMode() });
