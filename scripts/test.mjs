#!/usr/bin/env node
// `npm test` (and .ci/run): the whole suite against services of its own, never the demo's data or ports.
//
// Creates /tmp/offsetry-test-*/ with its own PostgreSQL cluster, S3 fake and mail fake on free loopback ports,
// migrates, builds the app into that folder, seeds the demo users, starts the built app, then runs vitest twice:
// every test file except tests/faults/ (in parallel), then tests/faults/ one file at a time — fault tests stop
// and restart shared services, which must not happen under another file's feet. Tears everything down and
// deletes the folder. Exit code: vitest's.
//
//   npm test -- [--keep] [--no-build] [--no-services] [vitest args, e.g. tests/engine -t name]
//   --keep         keep the run folder (logs, database, objects, captured mail)
//   --no-build     serve ./dist as it is (after `npm run build`) instead of building into the run folder
//   --no-services  start nothing and run vitest only (unit tests)
//
// Tests reach the harness through the environment (see tests/support/services.ts): service addresses, PG_*,
// OFFSETRY_APP_ENTRY and OFFSETRY_TEST_CONTROL_URL, a loopback JSON API to stop/start services and app instances.
// Node built-ins only in this file and scripts/lib (it runs before node_modules exists).
import crypto from 'node:crypto';
import fs from 'node:fs';
import http from 'node:http';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { aptInstall, ensureDependencies } from './lib/bootstrap.mjs';
import { startMailFake, startS3Fake } from './lib/fakes.mjs';
import { findFreePort, findFreePorts } from './lib/ports.mjs';
import { ensurePgBin, findPgBin, pgCluster, prepareClusterDir } from './lib/postgres.mjs';
import {
  localBin, onShutdown, run, shutdown, spawnLogged, StartError, stopLeftover, tail, waitForPort, writePidFile,
} from './lib/proc.mjs';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const argv = process.argv.slice(2);
const flag = (/** @type {string} */ name) => {
  const i = argv.indexOf(name);
  if (i >= 0) argv.splice(i, 1);
  return i >= 0;
};
const keep = flag('--keep');
const noBuild = flag('--no-build');
const noServices = flag('--no-services');
const vitestArgs = argv;

/** @param {string} line */
const say = (line) => console.log(`[test] ${line}`);

/**
 * @param {string} name
 * @param {string[]} args
 * @returns {[string, string[]]}
 */
function tool(name, args) {
  const bin = localBin(root, name);
  return bin ? [bin, args] : ['npx', ['--no-install', name, ...args]];
}

/** Debian's chromium for the browser tests; SciPy for the reference checks of the numerics. */
async function ensureSystemTools() {
  /** @type {Record<string, string>} */
  const extra = {};
  if (!fs.existsSync('/usr/bin/chromium')) {
    await aptInstall(['chromium'], '/usr/bin/chromium is missing (browser tests)', say);
  }
  if (!fs.existsSync('/usr/bin/pdftotext') || !fs.existsSync('/usr/bin/pdftoppm')) {
    await aptInstall(['poppler-utils'], 'pdftotext / pdftoppm are missing (certificate text and page checks)', say);
  }
  const python = await run('python3', ['-c', 'import scipy, sys; print(sys.executable)'], { allowFail: true });
  if (python.code !== 0) {
    await aptInstall(['python3-scipy'], 'python3 cannot import scipy (numerical reference checks)', say);
    extra.PYTHON = '/usr/bin/python3';
  } else {
    extra.PYTHON = python.stdout.trim() || 'python3';
  }
  return extra;
}

/**
 * Run vitest with our terminal.
 * @param {string[]} args
 * @param {NodeJS.ProcessEnv} env
 */
async function vitest(args, env) {
  const [cmd, cmdArgs] = tool('vitest', ['run', ...args]);
  const result = await run(cmd, cmdArgs, { cwd: root, env, inherit: true, allowFail: true });
  return result.code;
}

/**
 * Two vitest passes: everything but tests/faults (parallel), then tests/faults (one file at a time).
 * User filters apply to both passes; a pass that matches no file is not a failure when filters were given.
 * @param {NodeJS.ProcessEnv} env
 */
async function runSuites(env) {
  const testsDir = path.join(root, 'tests');
  const faultsDir = path.join(testsDir, 'faults');
  const hasFaultTests = fs.existsSync(faultsDir) && fs.readdirSync(faultsDir, { recursive: true }).some((f) => String(f).endsWith('.test.ts'));
  const filtered = vitestArgs.length > 0;
  const lenient = filtered || !hasFaultTests ? ['--passWithNoTests'] : [];
  const first = await vitest(['--exclude', 'tests/faults/**', ...lenient, ...vitestArgs], env);
  if (!hasFaultTests) return first;
  // Path filters (vitest matches them as substrings of file paths) that name no fault test: skip the pass.
  const faultFiles = fs.readdirSync(faultsDir, { recursive: true }).map((f) => `tests/faults/${String(f)}`);
  const pathFilters = vitestArgs.filter((arg, i) => !arg.startsWith('-') && !(vitestArgs[i - 1] ?? '').startsWith('-'));
  if (pathFilters.length && pathFilters.every((f) => f.includes('/')) && !pathFilters.some((f) => faultFiles.some((file) => file.includes(f.replace(/^\.\//, ''))))) {
    return first;
  }
  // Second pass: exclude every other folder (vitest has no "only this folder" flag that keeps user filters).
  const others = fs
    .readdirSync(testsDir, { withFileTypes: true })
    .filter((e) => e.isDirectory() && e.name !== 'faults')
    .flatMap((e) => ['--exclude', `tests/${e.name}/**`]);
  say('fault tests (they stop and restart services) — one file at a time');
  const second = await vitest(
    ['--no-file-parallelism', '--passWithNoTests', '--exclude', 'tests/*.test.ts', ...others, ...vitestArgs],
    env,
  );
  return first || second;
}

/**
 * Serve the harness's control API on loopback: tests stop/start services and app instances through it, so
 * the harness stays the one owner of every process and tears all of it down at the end.
 * @param {number} port
 * @param {Record<string, (body: any) => Promise<unknown>>} routes "METHOD /path" → handler (":id" supported)
 */
function serveControl(port, routes) {
  /** @type {Promise<unknown>} one operation at a time: a stop and a start must not interleave */
  let queue = Promise.resolve();
  const server = http.createServer((req, res) => {
    let raw = '';
    req.on('data', (chunk) => (raw += chunk));
    req.on('end', () => {
      const url = new URL(req.url ?? '/', 'http://127.0.0.1');
      /** @type {[string, (body: any) => Promise<unknown>] | undefined} */
      let match;
      /** @type {Record<string, string>} */
      let params = {};
      for (const entry of Object.entries(routes)) {
        const [method, pattern] = entry[0].split(' ');
        const want = pattern.split('/');
        const got = url.pathname.split('/');
        if (method !== req.method || want.length !== got.length) continue;
        /** @type {Record<string, string>} */
        const p = {};
        if (want.every((w, i) => (w.startsWith(':') ? ((p[w.slice(1)] = decodeURIComponent(got[i])), true) : w === got[i]))) {
          match = entry;
          params = p;
          break;
        }
      }
      const reply = (/** @type {number} */ status, /** @type {unknown} */ body) => {
        res.writeHead(status, { 'content-type': 'application/json' });
        res.end(JSON.stringify(body ?? null));
      };
      if (!match) return reply(404, { error: `no control endpoint ${req.method} ${url.pathname}` });
      let body = {};
      try {
        body = raw ? JSON.parse(raw) : {};
      } catch {
        return reply(400, { error: 'body must be JSON' });
      }
      const handler = match[1];
      const op = queue.then(() => handler({ ...body, ...params }));
      queue = op.catch(() => {});
      op.then(
        (result) => reply(200, result ?? { ok: true }),
        (error) => reply(500, { error: error instanceof Error ? error.message : String(error) }),
      );
    });
  });
  return new Promise((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, '127.0.0.1', () => resolve(server));
  });
}

/**
 * Clean up after runs whose harness was killed without its teardown (kill -9, a closed terminal): their
 * folder holds harness.pid naming a process that no longer exists. Stops their PostgreSQL and app instances
 * (fakes end by themselves when their parent is gone) and deletes the folder. Kept runs (--keep) have no
 * harness.pid and are left alone.
 */
async function sweepCrashedRuns() {
  for (const name of fs.readdirSync('/tmp')) {
    if (!name.startsWith('offsetry-test-')) continue;
    const dir = path.join('/tmp', name);
    const pidFile = path.join(dir, 'harness.pid');
    let pid = 0;
    try {
      pid = Number.parseInt(fs.readFileSync(pidFile, 'utf8'), 10);
    } catch {
      continue;
    }
    if (fs.existsSync(`/proc/${pid}`)) continue;
    const pidsDir = path.join(dir, 'pids');
    for (const file of fs.existsSync(pidsDir) ? fs.readdirSync(pidsDir) : []) {
      await stopLeftover(path.join(pidsDir, file), dir);
    }
    const dataDir = path.join(dir, 'pg', 'data');
    if (fs.existsSync(path.join(dataDir, 'postmaster.pid'))) {
      const bin = findPgBin();
      if (bin) await pgCluster({ bin, dir: path.join(dir, 'pg'), port: 0 }).stop('immediate').catch(() => {});
    }
    fs.rmSync(dir, { recursive: true, force: true });
    say(`removed ${dir}, left behind by a test run that was killed`);
  }
}

async function main() {
  await ensureDependencies(root, say);
  const systemEnv = await ensureSystemTools();
  if (noServices) {
    say('--no-services: running vitest only');
    return vitest(vitestArgs, { ...process.env, ...systemEnv });
  }

  await sweepCrashedRuns();
  const started = Date.now();
  const runDir = fs.mkdtempSync('/tmp/offsetry-test-');
  // The postgres user must be able to enter it (mkdtemp makes it 700, owned by us).
  fs.chmodSync(runDir, 0o755);
  const harnessPidFile = path.join(runDir, 'harness.pid');
  writePidFile(harnessPidFile, process.pid);
  const logDir = path.join(runDir, 'logs');
  fs.mkdirSync(logDir);
  // The build lands in the run folder; its bare imports (postgres, auth, …) resolve from the folder they are
  // in, so the run folder gets the project's node_modules as a link.
  fs.symlinkSync(path.join(root, 'node_modules'), path.join(runDir, 'node_modules'), 'dir');
  onShutdown(() => {
    if (keep) {
      fs.rmSync(harnessPidFile, { force: true });
      say(`kept ${runDir}`);
    } else {
      fs.rmSync(runDir, { recursive: true, force: true });
    }
  });

  const [pgPort, s3Port, smtpPort, mailApiPort, appPort, controlPort] = await findFreePorts(6);
  const bucket = 'offsetry-test';
  const dbUser = 'offsetry_test';
  const dbPassword = crypto.randomBytes(12).toString('base64url');

  // ---- services, in parallel -------------------------------------------------------------------------------
  const pgTask = (async () => {
    const bin = await ensurePgBin({ log: say });
    const dir = await prepareClusterDir(path.join(runDir, 'pg'));
    // Durability is pointless for a throw-away cluster; these settings make it quick (PostgreSQL docs,
    // "Non-Durable Settings"). max_connections leaves room for several app instances and workers.
    const cluster = pgCluster({
      bin,
      dir,
      port: pgPort,
      settings: { fsync: 'off', synchronous_commit: 'off', full_page_writes: 'off', max_connections: '200' },
    });
    await cluster.init();
    await cluster.start();
    onShutdown(() => cluster.stop('immediate'));
    const url = await cluster.ensureDatabase({ user: dbUser, password: dbPassword, database: 'offsetry_test' });
    return { cluster, url };
  })();

  /** @type {{ s3?: import('./lib/proc.mjs').ManagedProcess, mail?: import('./lib/proc.mjs').ManagedProcess }} */
  const fakes = {};
  const startS3 = async () => {
    fakes.s3 = await startS3Fake({ root, port: s3Port, dir: path.join(runDir, 's3'), bucket, logFile: path.join(logDir, 's3-fake.log') });
  };
  const startMail = async () => {
    fakes.mail = await startMailFake({
      root, smtpPort, apiPort: mailApiPort, dir: path.join(runDir, 'mail'), logFile: path.join(logDir, 'mail-fake.log'),
    });
  };
  const [{ cluster, url: databaseUrl }] = await Promise.all([pgTask, startS3(), startMail()]);

  const appUrl = `http://127.0.0.1:${appPort}`;
  const outDir = path.join(runDir, 'dist');
  const repoEntry = path.join(root, 'dist', 'server', 'entry.mjs');
  const appEntry = noBuild ? repoEntry : path.join(outDir, 'server', 'entry.mjs');

  /** @type {NodeJS.ProcessEnv} */
  const env = {
    ...process.env,
    ...systemEnv,
    NODE_ENV: 'production',
    OFFSETRY_MODE: 'demo',
    DEMO_PASSWORD: 'offsetry-demo',
    HOST: '127.0.0.1',
    PORT: String(appPort),
    PUBLIC_BASE_URL: appUrl,
    BASE_URL: appUrl,
    // vitest overwrites BASE_URL with Vite's base path ('/'), so tests read this name.
    OFFSETRY_TEST_BASE_URL: appUrl,
    AUTH_SECRET: crypto.randomBytes(32).toString('base64url'),
    AUTH_TRUST_HOST: 'true',
    DATABASE_URL: databaseUrl,
    S3_ENDPOINT: `http://127.0.0.1:${s3Port}`,
    S3_REGION: 'us-east-1',
    S3_BUCKET: bucket,
    S3_ACCESS_KEY_ID: 'S3RVER',
    S3_SECRET_ACCESS_KEY: 'S3RVER',
    S3_FORCE_PATH_STYLE: 'true',
    SMTP_HOST: '127.0.0.1',
    SMTP_PORT: String(smtpPort),
    SMTP_SECURE: 'false',
    SMTP_USER: '',
    SMTP_PASS: '',
    MAIL_FROM: 'Offsetry <no-reply@offsetry.local>',
    MAIL_FAKE_API_URL: `http://127.0.0.1:${mailApiPort}`,
    OFFSETRY_TEST_RUN_DIR: runDir,
    OFFSETRY_TEST_CONTROL_URL: `http://127.0.0.1:${controlPort}`,
    OFFSETRY_APP_ENTRY: appEntry,
    PG_BIN: cluster.bin,
    PG_DATA: cluster.dataDir,
    PG_PORT: String(pgPort),
    PG_SOCKET_DIR: cluster.socketDir,
    PG_LOG: cluster.logFile,
    S3_FAKE_DIR: path.join(runDir, 's3'),
    MAIL_FAKE_DIR: path.join(runDir, 'mail'),
    CHROMIUM_PATH: process.env.CHROMIUM_PATH ?? '/usr/bin/chromium',
  };
  delete env.OFFSETRY_OUT_DIR;

  // ---- schema, build, seed ---------------------------------------------------------------------------------
  /**
   * @param {string} label
   * @param {string} script
   * @param {string[]} args
   */
  const tsxStep = async (label, script, args) => {
    if (!fs.existsSync(path.join(root, script))) {
      say(`${label}: ${script} not found — skipped`);
      return;
    }
    const logFile = path.join(logDir, `${label}.log`);
    const [cmd, cmdArgs] = tool('tsx', [script, ...args]);
    const result = await run(cmd, cmdArgs, { cwd: root, env, logFile, allowFail: true });
    if (result.code !== 0) throw new StartError(`${label} (${script} ${args.join(' ')}) failed`, logFile);
  };
  await tsxStep('migrate', 'scripts/migrate.ts', []);

  let buildSeconds = 0;
  if (!noBuild && fs.existsSync(path.join(root, 'astro.config.mjs'))) {
    const buildStarted = Date.now();
    const logFile = path.join(logDir, 'build.log');
    const [cmd, args] = tool('astro', ['build']);
    // The env is set at build time so Astro emits process.env lookups instead of inlining values.
    const result = await run(cmd, args, { cwd: root, env: { ...env, OFFSETRY_OUT_DIR: outDir }, logFile, allowFail: true });
    if (result.code !== 0) throw new StartError('astro build failed', logFile);
    buildSeconds = (Date.now() - buildStarted) / 1000;
  }
  await tsxStep('seed', 'scripts/seed.ts', ['--users-only']);

  // ---- app instances ---------------------------------------------------------------------------------------
  /** @type {Map<string, import('./lib/proc.mjs').ManagedProcess & { url: string, port: number }>} */
  const apps = new Map();
  let appCount = 0;
  /**
   * @param {{ env?: Record<string, string>, entry?: string, args?: string[], port?: number, wait?: boolean }} options
   *   wait: wait for the port (default true; false for a worker that listens on nothing)
   */
  const startApp = async (options = {}) => {
    const entry = options.entry ?? appEntry;
    if (!fs.existsSync(entry)) throw new Error(`app entry ${entry} does not exist (was the app built?)`);
    const port = options.port ?? (await findFreePort());
    const id = `app${++appCount}`;
    const url = `http://127.0.0.1:${port}`;
    const proc = spawnLogged(id, process.execPath, [entry, ...(options.args ?? [])], {
      cwd: root,
      env: { ...env, PORT: String(port), PUBLIC_BASE_URL: url, BASE_URL: url, ...(options.env ?? {}) },
      logFile: path.join(logDir, `${id}.log`),
    });
    const app = Object.assign(proc, { url, port });
    apps.set(id, app);
    const appPidFile = path.join(runDir, 'pids', `${id}.pid`);
    writePidFile(appPidFile, proc.pid);
    proc.exited.then(() => {
      apps.delete(id);
      fs.rmSync(appPidFile, { force: true });
    });
    if (options.wait !== false) await waitForPort(port, { proc, timeoutMs: 60_000, what: `${id} (${entry})` });
    return { id, pid: proc.pid, port, url, logFile: proc.logFile };
  };
  onShutdown(() => Promise.all([...apps.values()].map((a) => a.stop())));

  let mainApp = '';
  if (fs.existsSync(appEntry)) {
    const first = await startApp({ port: appPort });
    mainApp = first.id;
  } else {
    say(`no app at ${appEntry}: BASE_URL (${appUrl}) is not served in this run`);
  }

  // ---- control API -----------------------------------------------------------------------------------------
  const withFake = async (/** @type {'s3' | 'mail'} */ name, /** @type {boolean} */ up) => {
    const proc = fakes[name];
    if (!up) {
      if (proc?.running()) await proc.stop();
      return { running: false };
    }
    if (!proc?.running()) await (name === 's3' ? startS3() : startMail());
    return { running: true, pid: fakes[name]?.pid };
  };
  await serveControl(controlPort, {
    'GET /status': async () => ({
      postgres: (await cluster.runningPort()) === pgPort,
      s3: Boolean(fakes.s3?.running()),
      mail: Boolean(fakes.mail?.running()),
      apps: [...apps.entries()].map(([id, a]) => ({ id, pid: a.pid, url: a.url })),
    }),
    'POST /postgres/stop': async (body) => {
      await cluster.stop(body.mode === 'immediate' ? 'immediate' : 'fast');
      return { running: false };
    },
    'POST /postgres/start': async () => {
      await cluster.start();
      return { running: true };
    },
    'POST /postgres/restart': async () => {
      await cluster.restart();
      return { running: true };
    },
    'POST /s3/stop': () => withFake('s3', false),
    'POST /s3/start': () => withFake('s3', true),
    'POST /mail/stop': () => withFake('mail', false),
    'POST /mail/start': () => withFake('mail', true),
    'POST /apps': (body) => startApp(body),
    'POST /apps/:id/stop': async (body) => {
      const app = apps.get(body.id);
      if (!app) return { stopped: false, reason: `no running instance ${body.id}` };
      const info = await app.stop(body.signal ?? 'SIGTERM');
      return { stopped: true, ...info };
    },
  });

  // ---- header and the suites -------------------------------------------------------------------------------
  const setup = ((Date.now() - started) / 1000).toFixed(1);
  console.log(
    [
      `[test] run folder  ${runDir}${keep ? ' (kept)' : ''}`,
      `[test] PostgreSQL  127.0.0.1:${pgPort} (database offsetry_test, ${cluster.bin})`,
      `[test] S3 fake     ${env.S3_ENDPOINT} (bucket ${bucket})`,
      `[test] mail fake   smtp://127.0.0.1:${smtpPort} · ${env.MAIL_FAKE_API_URL}`,
      `[test] app         ${mainApp ? appUrl : '(not started)'}${buildSeconds ? ` · built in ${buildSeconds.toFixed(1)} s` : noBuild ? ' · ./dist (--no-build)' : ''}`,
      `[test] control     ${env.OFFSETRY_TEST_CONTROL_URL} · ready in ${setup} s`,
    ].join('\n'),
  );
  const code = await runSuites(env);
  // A crash of the main app during the run is worth knowing about even when tests passed.
  if (mainApp && !apps.has(mainApp)) say(`note: the app exited during the run; its log:\n${tail(path.join(logDir, `${mainApp}.log`), 20)}`);
  if (code !== 0 && !keep) {
    // The run folder goes away; its logs (app instances, fakes, PostgreSQL) are what explains a failure.
    const saved = fs.mkdtempSync('/tmp/offsetry-test-logs-');
    fs.cpSync(logDir, saved, { recursive: true });
    if (fs.existsSync(cluster.logFile)) fs.copyFileSync(cluster.logFile, path.join(saved, 'postgres.log'));
    say(`tests failed: service and app logs saved in ${saved}`);
  }
  return code;
}

let exitCode = 1;
try {
  exitCode = await main();
} catch (error) {
  console.error(`\nnpm test could not set up its services:\n${error instanceof Error ? error.message : error}`);
  exitCode = 1;
}
await shutdown();
process.exit(exitCode);
