#!/usr/bin/env node
// `npm start`: one command from a fresh clone to a running demo on http://127.0.0.1:4321.
// Installs dependencies when missing, writes .env on the first run, starts PostgreSQL and the S3 and mail
// fakes on loopback, migrates, seeds the demo, builds and serves. `--dev` runs `astro dev` instead of
// build + serve. Ctrl-C stops everything it started. Node built-ins only (it runs before node_modules exists).
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { ensureDependencies } from './lib/bootstrap.mjs';
import { ensureEnvFile } from './lib/env.mjs';
import { isPortFree } from './lib/ports.mjs';
import {
  StartError, isShuttingDown, localBin, onShutdown, run, shutdown, spawnLogged, stopLeftover, waitForPort, writePidFile,
} from './lib/proc.mjs';
import { startLocalServices } from './lib/stack.mjs';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const dev = process.argv.includes('--dev');
const unknown = process.argv.slice(2).filter((arg) => arg !== '--dev');
if (unknown.length) {
  console.error(`npm start: unknown option ${unknown.join(' ')} (known: --dev)`);
  process.exit(2);
}

export const DEMO_SIGN_INS = [
  ['technician@example.com', 'technician'],
  ['engineer@example.com', 'metrology engineer'],
  ['engineer2@example.com', 'metrology engineer (second reviewer)'],
  ['quality@example.com', 'quality'],
  ['service@example.com', 'service manager'],
  ['admin@example.com', 'admin'],
];

/** @param {string} line */
const say = (line) => console.log(`[start] ${line}`);

/**
 * A project tool from node_modules/.bin (npx as a fallback).
 * @param {string} name
 * @param {string[]} args
 * @returns {[string, string[]]}
 */
function tool(name, args) {
  const bin = localBin(root, name);
  return bin ? [bin, args] : ['npx', ['--no-install', name, ...args]];
}

/**
 * Run a step with our terminal; a missing script is reported, not fatal (the app may be younger than this).
 * @param {string} label
 * @param {string} script relative to the root
 * @param {string[]} args
 * @param {NodeJS.ProcessEnv} env
 */
async function tsxStep(label, script, args, env) {
  if (!fs.existsSync(path.join(root, script))) {
    say(`${label}: ${script} not found — skipped`);
    return;
  }
  say(`${label}: tsx ${script} ${args.join(' ')}`.trimEnd());
  const [cmd, cmdArgs] = tool('tsx', [script, ...args]);
  await run(cmd, cmdArgs, { cwd: root, env, inherit: true });
}

/**
 * Astro inlines non-public env values found at build time unless the same key is in process.env then (it
 * then emits a runtime process.env lookup; see astro/dist/env/env-loader.js). We build with the env set, and
 * check the output anyway: a secret in dist/ would travel with every copy of the build.
 * @param {string} outDir
 * @param {string} secret
 */
function findSecretInBuild(outDir, secret) {
  if (!secret || secret.length < 16) return [];
  /** @type {string[]} */
  const hits = [];
  /** @param {string} dir */
  const walk = (dir) => {
    for (const entry of fs.readdirSync(dir, { withFileTypes: true })) {
      const file = path.join(dir, entry.name);
      if (entry.isDirectory()) walk(file);
      else if (/\.(m?js|json|html|map)$/.test(entry.name) && fs.readFileSync(file, 'utf8').includes(secret)) hits.push(file);
    }
  };
  if (fs.existsSync(outDir)) walk(outDir);
  return hits;
}

try {
  await ensureDependencies(root, say);
  const envFile = path.join(root, '.env');
  const { values, created, added } = ensureEnvFile(envFile);
  if (created) say('wrote .env with demo defaults (ports 54329–54332 and 4321, a generated AUTH_SECRET)');
  else if (added.length) say(`added missing keys to .env: ${added.join(', ')}`);

  // .env wins over the inherited environment, so a stray PORT or HOST in the shell cannot move the demo.
  /** @type {NodeJS.ProcessEnv} */
  const env = { ...process.env, ...values };
  delete env.OFFSETRY_OUT_DIR; // npm start serves ./dist
  const host = env.HOST || '127.0.0.1';
  const port = Number.parseInt(env.PORT || '4321', 10);
  const mode = env.OFFSETRY_MODE || 'demo';

  const services = await startLocalServices({ root, env: values, log: say });
  onShutdown(() => services.stopAll());
  if (services.started.length) say(`started ${services.started.join(' · ')}`);

  await tsxStep('migrate', 'scripts/migrate.ts', [], env);
  if (mode === 'demo') await tsxStep('seed demo', 'scripts/seed.ts', [], env);
  else say(`OFFSETRY_MODE=${mode}: no demo seed`);

  const appPidFile = path.join(root, '.data', 'pids', 'app.pid');
  if (await stopLeftover(appPidFile, dev ? 'astro' : 'entry.mjs')) say('stopped the app left over from an earlier start');
  if (!(await isPortFree(port, host))) {
    throw new Error(`the app's port ${host}:${port} is taken by another program. Stop it, or set PORT and PUBLIC_BASE_URL in .env.`);
  }

  /** @type {import('./lib/proc.mjs').ManagedProcess} */
  let app;
  const appLog = path.join(services.logDir, dev ? 'astro-dev.log' : 'app.log');
  if (dev) {
    const [cmd, args] = tool('astro', ['dev', '--host', host, '--port', String(port)]);
    app = spawnLogged('astro dev', cmd, args, { cwd: root, env, logFile: appLog, echo: true });
  } else {
    say('build: astro build');
    const started = Date.now();
    const [cmd, args] = tool('astro', ['build']);
    await run(cmd, args, { cwd: root, env, inherit: true });
    say(`build finished in ${((Date.now() - started) / 1000).toFixed(1)} s`);
    const leaks = findSecretInBuild(path.join(root, 'dist'), values.AUTH_SECRET ?? '');
    if (leaks.length) {
      say(`WARNING: AUTH_SECRET appears in the build output (${leaks.map((f) => path.relative(root, f)).join(', ')}).`);
      say('         Read it from process.env at run time, not import.meta.env.');
    }
    const entry = path.join(root, 'dist', 'server', 'entry.mjs');
    if (!fs.existsSync(entry)) throw new Error(`the build did not produce ${path.relative(root, entry)}`);
    // The built server does not read .env: it gets the whole environment explicitly.
    app = spawnLogged('app', process.execPath, [entry], { cwd: root, env, logFile: appLog, echo: true });
  }
  writePidFile(appPidFile, app.pid);
  onShutdown(() => app.stop().finally(() => fs.rmSync(appPidFile, { force: true })));
  await waitForPort(port, { host, proc: app, timeoutMs: dev ? 120_000 : 60_000, what: dev ? 'astro dev' : 'the app' });

  const base = env.PUBLIC_BASE_URL || `http://${host}:${port}`;
  const lines = ['', `Offsetry is running: ${base}`, ''];
  if (mode === 'demo') {
    lines.push(`Demo sign-ins (password: ${env.DEMO_PASSWORD || 'offsetry-demo'}):`);
    for (const [email, role] of DEMO_SIGN_INS) lines.push(`  ${email.padEnd(26)} ${role}`);
    lines.push('');
  }
  lines.push(`Mail outbox (admin): ${base}/admin/mail`);
  lines.push(`Logs: ${path.relative(root, services.logDir)}/   ·   Ctrl-C stops everything`);
  console.log(lines.join('\n'));

  const info = await app.exited;
  if (isShuttingDown()) {
    // Ctrl-C: the signal handler is stopping everything; wait for it to finish.
    await shutdown();
    process.exit(130);
  }
  console.error(`\n[start] the app exited (${info.signal ?? `code ${info.code}`}); stopping services …`);
  await shutdown();
  process.exit(info.code === 0 ? 0 : 1);
} catch (error) {
  console.error(`\nnpm start failed:\n${error instanceof Error ? error.message : error}`);
  if (error instanceof StartError && error.logFile) console.error(`(full log: ${error.logFile})`);
  await shutdown();
  process.exit(1);
}
