/**
 * Worker-thread side of report work (certificate PDF, accuracy map), loaded by report-runner.ts through
 * tsx's loader: one task per thread, result posted back.
 */
import { parentPort } from 'node:worker_threads';
import { runReportTask, type ReportTask, type ReportThreadMessage } from './report-tasks';

const port = parentPort;
if (port) {
  const post = (m: ReportThreadMessage, transfer: ArrayBuffer[] = []) => port.postMessage(m, transfer);
  port.on('message', (task: ReportTask) => {
    runReportTask(task).then(
      (result) => post({ type: 'done', result }),
      (err) => post({ type: 'error', message: String((err as Error)?.stack ?? err) }),
    );
  });
  post({ type: 'ready' });
}
