import { config } from './config';
import { log } from './log';
import { startMailSender } from './mail';

let started = false;

/** Background work of an app instance (mail queue sender; the fit worker joins here). Idempotent. */
export function startBackground() {
  if (started) return;
  started = true;
  if (process.env.VITEST) return;
  startMailSender();
  if (config().RUN_WORKER) {
    // Loaded on demand: instances without a worker never load the fit code (the mail sender opens the queue).
    void import('./jobs').then(({ startWorker, stopWorker }) => {
      void startWorker({ concurrency: 1 }).catch((err) => log('error', 'fit worker did not start', { error: String(err) }));
      void import('./webhooks').then(({ startWebhookSender }) => startWebhookSender());
      void import('./compensations').then(({ startCompensationWorker }) => startCompensationWorker()).catch((err) => log('error', 'compensation worker did not start', { error: String(err) }));
      void import('./fleet-snapshots').then(({ startFleetSnapshotWorker }) => startFleetSnapshotWorker()).catch((err) => log('error', 'fleet snapshot worker did not start', { error: String(err) }));
      // A running fit finishes (or is handed back to the queue) before the process exits.
      process.once('SIGTERM', () => void stopWorker(10_000).finally(() => process.exit(0)));
    });
  }
}
