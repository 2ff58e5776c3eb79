#!/usr/bin/env node
// `npm run services`: PostgreSQL, the S3 fake and the mail fake for development, kept running until Ctrl-C.
// Prints the environment the app needs (the same as .env). Node built-ins only.
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { ensureDependencies } from './lib/bootstrap.mjs';
import { ensureEnvFile, formatEnvLine } from './lib/env.mjs';
import { onShutdown, shutdown } from './lib/proc.mjs';
import { startLocalServices } from './lib/stack.mjs';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');

try {
  await ensureDependencies(root);
  const { values, created } = ensureEnvFile(path.join(root, '.env'));
  if (created) console.log('Wrote .env with demo defaults (a generated AUTH_SECRET).');
  const services = await startLocalServices({ root, env: values });
  onShutdown(() => services.stopAll());
  console.log(`\nRunning: ${services.started.join(' · ') || 'nothing new (all reused or external)'}`);
  console.log(`Logs: ${services.logDir}\n\nEnvironment (also in .env):`);
  for (const key of ['DATABASE_URL', 'S3_ENDPOINT', 'S3_BUCKET', 'SMTP_HOST', 'SMTP_PORT', 'MAIL_FAKE_API_URL']) {
    console.log(`  export ${formatEnvLine(key, values[key] ?? '')}`);
  }
  console.log('\nCtrl-C stops them.');
  // Keep the event loop alive until a signal arrives; proc.mjs's handlers run the shutdown.
  setInterval(() => {}, 1 << 30);
} catch (error) {
  console.error(`\nnpm run services failed:\n${error instanceof Error ? error.message : error}`);
  await shutdown();
  process.exit(1);
}
