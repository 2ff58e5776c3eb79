// Launch the S3 fake and the mail fake as children on loopback and wait until they listen.
// Node built-ins only (the fakes themselves import s3rver / smtp-server in their own processes).
import path from 'node:path';
import { spawnLogged, waitForPort } from './proc.mjs';

/**
 * @param {{ root: string, host?: string, port: number, dir: string, bucket: string, logFile: string }} options
 * @returns {Promise<import('./proc.mjs').ManagedProcess>}
 */
export async function startS3Fake(options) {
  const host = options.host ?? '127.0.0.1';
  const script = path.join(options.root, 'docker-fake-s3', 'server.mjs');
  const proc = spawnLogged(
    's3-fake',
    process.execPath,
    [script, '--host', host, '--port', String(options.port), '--dir', options.dir, '--bucket', options.bucket],
    { cwd: options.root, logFile: options.logFile, env: { ...process.env, OFFSETRY_EXIT_WITH_PARENT: '1' } },
  );
  await waitForPort(options.port, { host, proc, timeoutMs: 30_000, what: `S3 fake (${script})` });
  return proc;
}

/**
 * @param {{ root: string, host?: string, smtpPort: number, apiPort: number, dir: string, logFile: string }} options
 * @returns {Promise<import('./proc.mjs').ManagedProcess>}
 */
export async function startMailFake(options) {
  const host = options.host ?? '127.0.0.1';
  const script = path.join(options.root, 'scripts', 'mail-fake.mjs');
  const proc = spawnLogged(
    'mail-fake',
    process.execPath,
    [
      script, '--host', host, '--smtp-port', String(options.smtpPort),
      '--api-port', String(options.apiPort), '--dir', options.dir,
    ],
    { cwd: options.root, logFile: options.logFile, env: { ...process.env, OFFSETRY_EXIT_WITH_PARENT: '1' } },
  );
  // The API listens after SMTP: both ports open means ready.
  await waitForPort(options.smtpPort, { host, proc, timeoutMs: 30_000, what: `mail fake SMTP (${script})` });
  await waitForPort(options.apiPort, { host, proc, timeoutMs: 30_000, what: `mail fake API (${script})` });
  return proc;
}
