#!/usr/bin/env node
// Load benchmark (`npm run bench -- load`): the list and detail endpoints under 50 concurrent signed-in clients.
//
// Starts a throw-away stack of its own on loopback (PostgreSQL cluster, S3 and mail fakes, the built app on
// free ports, in /tmp/offsetry-bench-*), seeds 200 units and 5 000 sessions (5 poses each) straight in SQL,
// gives each of 50 users an API token, then runs autocannon with 50 connections — one user per connection —
// for a bounded time per endpoint. Prints requests/s, p50/p95/p99 latency and errors beside the target
// (p95 < 100 ms on list endpoints, no errors). Never fails on the target: the figures are the result.
//
//   node scripts/bench-load.mjs [--duration S] [--connections N] [--no-build] [--keep] [--explain]
//     --duration S     seconds per endpoint (default 10)
//     --connections N  concurrent clients (default 50)
//     --no-build       serve ./dist as it is instead of building into the run folder
//     --keep           keep the run folder
//     --explain        print EXPLAIN ANALYZE of the list queries' SQL shape after the run
import crypto from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { startMailFake, startS3Fake } from './lib/fakes.mjs';
import { findFreePorts } from './lib/ports.mjs';
import { ensurePgBin, pgCluster, prepareClusterDir } from './lib/postgres.mjs';
import { localBin, onShutdown, run, shutdown, spawnLogged, StartError, waitForPort } from './lib/proc.mjs';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const argv = process.argv.slice(2);
const option = (/** @type {string} */ name, /** @type {string} */ fallback) => {
  const i = argv.indexOf(name);
  return i >= 0 ? argv[i + 1] ?? fallback : fallback;
};
const flag = (/** @type {string} */ name) => argv.includes(name);
const DURATION = Number(option('--duration', '10'));
const CONNECTIONS = Number(option('--connections', '50'));
const UNITS = 200;
const SESSIONS = 5000;
const POSES_PER_SESSION = 5;
const TARGET_P95_MS = 100;

/** @param {string} line */
const say = (line) => console.log(`[bench-load] ${line}`);

/** @param {string} name @param {string[]} args @returns {[string, string[]]} */
function tool(name, args) {
  const bin = localBin(root, name);
  return bin ? [bin, args] : ['npx', ['--no-install', name, ...args]];
}

/** Nearest-rank percentile of sorted values. @param {number[]} sorted @param {number} p */
function percentile(sorted, p) {
  if (!sorted.length) return NaN;
  return sorted[Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1))];
}

/**
 * Seed the benchmark data in SQL: one invented arm model, 200 units, 5 000 sessions with 5 poses each,
 * 50 engineer users with a token each. Returns what the load needs to address it.
 * @param {string} url
 */
async function seed(url) {
  const { default: postgres } = await import('postgres');
  const sql = postgres(url, { max: 2, onnotice: () => {} });
  try {
    const geometry = JSON.parse(fs.readFileSync(path.join(root, 'test-data', 'orrin-r6-620-nominal.json'), 'utf8'));
    const [model] = await sql`insert into arm_models (name, description) values ('BENCH-R6 (invented)', 'load benchmark') returning id`;
    const [rev] = await sql`insert into arm_model_revisions (model_id, revision, geometry) values (${model.id}, 1, ${sql.json(geometry)}) returning id`;
    await sql`
      insert into units (serial, model_revision_id, site, cell, commissioned_on)
      select 'BN-' || lpad(i::text, 5, '0'), ${rev.id}, 'Hall ' || (i % 7), 'C' || (i % 13), date '2022-01-01' + i::int
      from generate_series(1, ${UNITS}) i`;
    const perUnit = SESSIONS / UNITS;
    await sql`
      insert into sessions (unit_id, model_revision_id, measured_on, technician, instrument, file_name, file_key,
                            file_sha256, file_bytes, pose_count, joint_count)
      select u.id, u.model_revision_id, date '2023-01-01' + (k * 11)::int + (u.n % 5)::int, 'Bench Tech', 'tracker B-1',
             'visit-' || k || '.csv', 'sessions/' || u.serial || '/' || gen_random_uuid() || '/visit-' || k || '.csv',
             encode(sha256((u.serial || '/' || k)::bytea), 'hex'), 2048 + k, ${POSES_PER_SESSION}, 6
      from (select id, serial, model_revision_id, row_number() over (order by serial) as n from units) u,
           generate_series(1, ${perUnit}) k`;
    await sql`
      insert into session_poses (session_id, idx, line, label, q, x, y, z)
      select s.id, p - 1, p + 1, 'P' || p,
             array[p * 5.0, -20 + p, 30 - p, p * 2.0, 45.0, -p * 3.0]::double precision[],
             2000 + p * 10.5, -500 + p * 3.25, 700 + p * 1.75
      from sessions s, generate_series(1, ${POSES_PER_SESSION}) p`;
    /** @type {string[]} */
    const tokens = [];
    for (let i = 1; i <= CONNECTIONS; i++) {
      const [u] = await sql`insert into users (email, name, roles) values (${`bench-${i}@offsetry.test`}, ${`Bench Engineer ${i}`}, ${sql.array(['engineer'])}) returning id`;
      const token = `ofs_${crypto.randomBytes(24).toString('base64url')}`;
      const hash = crypto.createHash('sha256').update(token).digest('hex');
      await sql`insert into api_tokens (user_id, name, token_hash, prefix) values (${u.id}, 'bench', ${hash}, ${token.slice(0, 10)})`;
      tokens.push(token);
    }
    await sql`analyze`;
    const serials = (await sql`select serial from units order by serial`).map((r) => r.serial);
    const sessionIds = (await sql`select id from sessions`).map((r) => r.id);
    const [counts] = await sql`select (select count(*) from units)::int as units, (select count(*) from sessions)::int as sessions, (select count(*) from session_poses)::int as poses`;
    return { tokens, serials, sessionIds, counts };
  } finally {
    await sql.end();
  }
}

/**
 * One autocannon run: `connections` clients, each with its own user's token, for `duration` seconds.
 * Latencies come from every response (autocannon's own table has no 95th percentile).
 * @param {{ base: string, tokens: string[], path: () => string, duration: number }} o
 */
async function load(o) {
  const { default: autocannon } = await import('autocannon');
  /** @type {number[]} */
  const latencies = [];
  /** @type {Map<number, number>} */
  const statuses = new Map();
  let next = 0;
  const instance = autocannon({
    url: o.base,
    connections: o.tokens.length,
    duration: o.duration,
    timeout: 10,
    requests: [{ method: 'GET', setupRequest: (/** @type {any} */ req) => ({ ...req, path: o.path() }) }],
    setupClient: (/** @type {any} */ client) => client.setHeaders({ authorization: `Bearer ${o.tokens[next++ % o.tokens.length]}` }),
  });
  instance.on('response', (/** @type {any} */ _client, /** @type {number} */ status, /** @type {any} */ _bytes, /** @type {number} */ ms) => {
    latencies.push(ms);
    statuses.set(status, (statuses.get(status) ?? 0) + 1);
  });
  /** @type {any} */
  const result = await instance;
  latencies.sort((a, b) => a - b);
  const non200 = [...statuses].filter(([s]) => s !== 200).reduce((n, [, c]) => n + c, 0);
  return {
    requests: latencies.length,
    rps: latencies.length / o.duration,
    p50: percentile(latencies, 50),
    p95: percentile(latencies, 95),
    p99: percentile(latencies, 99),
    max: latencies[latencies.length - 1] ?? NaN,
    errors: (result.errors ?? 0) + (result.timeouts ?? 0) + non200,
    statuses: Object.fromEntries(statuses),
  };
}

async function main() {
  const started = Date.now();
  const runDir = fs.mkdtempSync('/tmp/offsetry-bench-');
  fs.chmodSync(runDir, 0o755);
  const logDir = path.join(runDir, 'logs');
  fs.mkdirSync(logDir);
  fs.symlinkSync(path.join(root, 'node_modules'), path.join(runDir, 'node_modules'), 'dir');
  onShutdown(() => {
    if (flag('--keep')) say(`kept ${runDir}`);
    else fs.rmSync(runDir, { recursive: true, force: true });
  });
  const [pgPort, s3Port, smtpPort, mailApiPort, appPort] = await findFreePorts(5);
  const bin = await ensurePgBin({ log: say });
  const cluster = pgCluster({
    bin,
    dir: await prepareClusterDir(path.join(runDir, 'pg')),
    port: pgPort,
    // Throw-away data: durability off (PostgreSQL docs, "Non-Durable Settings"); reads are what we measure.
    settings: { fsync: 'off', synchronous_commit: 'off', full_page_writes: 'off' },
  });
  await cluster.init();
  await cluster.start();
  onShutdown(() => cluster.stop('immediate'));
  const databaseUrl = await cluster.ensureDatabase({ user: 'offsetry_bench', password: crypto.randomBytes(12).toString('base64url'), database: 'offsetry_bench' });
  await Promise.all([
    startS3Fake({ root, port: s3Port, dir: path.join(runDir, 's3'), bucket: 'offsetry-bench', logFile: path.join(logDir, 's3-fake.log') }),
    startMailFake({ root, smtpPort, apiPort: mailApiPort, dir: path.join(runDir, 'mail'), logFile: path.join(logDir, 'mail-fake.log') }),
  ]);
  const base = `http://127.0.0.1:${appPort}`;
  /** @type {NodeJS.ProcessEnv} */
  const env = {
    ...process.env,
    NODE_ENV: 'production',
    OFFSETRY_MODE: 'demo',
    HOST: '127.0.0.1',
    PORT: String(appPort),
    PUBLIC_BASE_URL: base,
    AUTH_SECRET: crypto.randomBytes(32).toString('base64url'),
    DATABASE_URL: databaseUrl,
    S3_ENDPOINT: `http://127.0.0.1:${s3Port}`,
    S3_REGION: 'us-east-1',
    S3_BUCKET: 'offsetry-bench',
    S3_ACCESS_KEY_ID: 'S3RVER',
    S3_SECRET_ACCESS_KEY: 'S3RVER',
    S3_FORCE_PATH_STYLE: 'true',
    SMTP_HOST: '127.0.0.1',
    SMTP_PORT: String(smtpPort),
    SMTP_SECURE: 'false',
    MAIL_FROM: 'Offsetry <no-reply@offsetry.local>',
    RUN_WORKER: 'false',
  };
  delete env.OFFSETRY_OUT_DIR;

  const [tsx, tsxArgs] = tool('tsx', ['scripts/migrate.ts']);
  const migrated = await run(tsx, tsxArgs, { cwd: root, env, logFile: path.join(logDir, 'migrate.log'), allowFail: true });
  if (migrated.code !== 0) throw new StartError('migrate failed', path.join(logDir, 'migrate.log'));

  let entry = path.join(root, 'dist', 'server', 'entry.mjs');
  if (!flag('--no-build')) {
    const outDir = path.join(runDir, 'dist');
    const [astro, astroArgs] = tool('astro', ['build']);
    const built = await run(astro, astroArgs, { cwd: root, env: { ...env, OFFSETRY_OUT_DIR: outDir }, logFile: path.join(logDir, 'build.log'), allowFail: true });
    if (built.code !== 0) throw new StartError('astro build failed', path.join(logDir, 'build.log'));
    entry = path.join(outDir, 'server', 'entry.mjs');
  }
  if (!fs.existsSync(entry)) throw new Error(`${entry} does not exist (run npm run build, or drop --no-build)`);

  const seedStarted = Date.now();
  const data = await seed(databaseUrl);
  say(`seeded ${data.counts.units} units, ${data.counts.sessions} sessions, ${data.counts.poses} poses, ${data.tokens.length} users with tokens in ${((Date.now() - seedStarted) / 1000).toFixed(1)} s`);

  const app = spawnLogged('app', process.execPath, [entry], { cwd: root, env, logFile: path.join(logDir, 'app.log') });
  onShutdown(() => app.stop());
  await waitForPort(appPort, { proc: app, timeoutMs: 60_000, what: 'the app' });
  say(`stack ready in ${((Date.now() - started) / 1000).toFixed(1)} s · ${base} · ${DURATION} s per endpoint · ${CONNECTIONS} connections`);

  const pick = /** @template T @param {T[]} xs @returns {T} */ (xs) => xs[Math.floor(Math.random() * xs.length)];
  const pages = Math.ceil(UNITS / 25);
  const endpoints = [
    { name: 'GET /api/units?page=…', list: true, path: () => `/api/units?page=${1 + Math.floor(Math.random() * pages)}` },
    { name: 'GET /api/units/{serial}', list: false, path: () => `/api/units/${pick(data.serials)}` },
    { name: 'GET /api/sessions?unit=…', list: true, path: () => `/api/sessions?unit=${pick(data.serials)}` },
    { name: 'GET /api/sessions/{id}', list: false, path: () => `/api/sessions/${pick(data.sessionIds)}` },
  ];
  // Warm-up: first requests load modules and open the pool.
  for (const e of endpoints) {
    for (let i = 0; i < 20; i++) {
      const res = await fetch(base + e.path(), { headers: { authorization: `Bearer ${data.tokens[i % data.tokens.length]}` } });
      if (res.status !== 200) throw new Error(`warm-up ${e.name}: ${res.status} ${await res.text()}`);
      await res.arrayBuffer();
    }
  }

  // Then a short mixed run under full concurrency, so the first endpoint measured does not pay for the JIT.
  await load({ base, tokens: data.tokens, path: () => pick(endpoints).path(), duration: 3 });

  /** @type {Array<{ name: string, list: boolean } & Awaited<ReturnType<typeof load>>>} */
  const results = [];
  for (const e of endpoints) {
    say(`${e.name} …`);
    results.push({ name: e.name, list: e.list, ...(await load({ base, tokens: data.tokens, path: e.path, duration: DURATION })) });
  }

  const f = (/** @type {number} */ n, d = 1) => (Number.isFinite(n) ? n.toFixed(d) : '–');
  console.log('');
  console.log(`Load: ${CONNECTIONS} concurrent clients (one API token each), ${DURATION} s per endpoint, ${UNITS} units / ${SESSIONS} sessions, loopback`);
  console.log('endpoint                        req/s    p50 ms   p95 ms   p99 ms   max ms   requests  errors  target');
  for (const r of results) {
    const ok = r.errors === 0 && (!r.list || r.p95 < TARGET_P95_MS);
    const target = r.list ? `p95 < ${TARGET_P95_MS} ms, 0 errors: ${ok ? 'met' : 'MISSED'}` : `0 errors: ${r.errors === 0 ? 'met' : 'MISSED'}`;
    console.log(
      `${r.name.padEnd(30)} ${f(r.rps, 0).padStart(6)} ${f(r.p50).padStart(9)} ${f(r.p95).padStart(8)} ${f(r.p99).padStart(8)} ${f(r.max, 0).padStart(8)} ${String(r.requests).padStart(10)} ${String(r.errors).padStart(7)}  ${target}`,
    );
    if (r.errors) console.log(`    statuses: ${JSON.stringify(r.statuses)}`);
  }
  console.log(`(machine: ${(await import('node:os')).cpus().length} CPUs; the load generator shares them with the app and PostgreSQL)`);

  if (flag('--explain')) {
    const { default: postgres } = await import('postgres');
    const sql = postgres(databaseUrl, { max: 1, onnotice: () => {} });
    const serial = pick(data.serials);
    const plans = {
      'sessions of a unit': sql`explain analyze select s.*, u.serial from sessions s join units u on u.id = s.unit_id where u.serial = ${serial} order by s.measured_on desc, s.created_at desc, s.id limit 25`,
      'count of a unit': sql`explain analyze select count(*) from sessions s join units u on u.id = s.unit_id where u.serial = ${serial}`,
      'units page': sql`explain analyze select u.serial from units u join arm_model_revisions r on r.id = u.model_revision_id join arm_models m on m.id = r.model_id order by u.serial limit 25 offset 100`,
    };
    for (const [name, q] of Object.entries(plans)) {
      console.log(`\nEXPLAIN ANALYZE — ${name}`);
      for (const row of await q) console.log(`  ${row['QUERY PLAN']}`);
    }
    await sql.end();
  }
}

let code = 0;
try {
  await main();
} catch (e) {
  console.error(`bench-load failed: ${e instanceof Error ? e.message : e}`);
  code = 1;
}
await shutdown();
process.exit(code);
