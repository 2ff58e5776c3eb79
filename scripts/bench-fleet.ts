/**
 * Fleet benchmark (`npm run bench -- fleet`): the fleet pages' reads under 20 concurrent clients at 100,
 * 1 000 and 10 000 units, the first computation of a fleet's statistics, and a batch export of 1 000 units.
 *
 * Starts a throw-away stack on loopback like bench-load (PostgreSQL with durability off, S3 and mail fakes,
 * the built app with its background workers), seeds one benchmark fleet per size (scripts/fleet-fixture.ts:
 * five approved sets per unit, an export log of 2 entries per unit), gives 20 users (quality + service) an
 * API token each, then per size:
 *   - first snapshot: GET /api/arm-models/{id}/fleet until it answers 200 (the request queues the
 *     computation), with the job's own computing time;
 *   - 20 clients (autocannon), D seconds per endpoint: fleet statistics (a random page of 25 units), drift of
 *     a random unit, the unit list filtered by model with a search text and by site, the export log (a random
 *     page), the export picker (a page of the fleet's units, one serial);
 *   - at 1 000 units and more: POST /api/exports of 1 000 units, time to the last byte and the app's resident
 *     memory above its level before the export (sampled every 50 ms from /proc).
 * Prints p50 / p95 beside the target (p95 < 200 ms). Never fails on a target.
 *
 *   npx tsx scripts/bench-fleet.ts [--sizes 100,1000,10000] [--duration 8] [--no-build] [--keep]
 */
import crypto from 'node:crypto';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { startBenchStack } from './lib/bench-stack';
import { onShutdown, shutdown, spawnLogged, StartError, waitForPort } from './lib/proc.mjs';
import { seedFleet } from './fleet-fixture';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const argv = process.argv.slice(2);
const option = (name: string, fallback: string) => {
  const i = argv.indexOf(name);
  return i >= 0 ? (argv[i + 1] ?? fallback) : fallback;
};
const flag = (name: string) => argv.includes(name);
const SIZES = option('--sizes', '100,1000,10000').split(',').map(Number);
const DURATION = Number(option('--duration', '8'));
const CLIENTS = 20;
const TARGET_P95_MS = 200;
const EXPORT_UNITS = 1000;
/** The first computation is waited for at most this long per size (the bench stays bounded). */
const SNAPSHOT_LIMIT_MS = 15 * 60_000;
const say = (line: string) => console.log(`[bench-fleet] ${line}`);
const percentile = (sorted: number[], p: number) => (sorted.length ? sorted[Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1))]! : NaN);

async function load(o: { base: string; tokens: string[]; path: () => string; duration: number }) {
  // autocannon ships no type declarations.
  const { default: autocannon } = (await import('autocannon' as string)) as { default: (options: unknown) => unknown };
  const latencies: number[] = [];
  const statuses = new Map<number, number>();
  let bytes = 0;
  let next = 0;
  const instance = autocannon({
    url: o.base,
    connections: o.tokens.length,
    duration: o.duration,
    timeout: 20,
    requests: [{ method: 'GET', setupRequest: (req: Record<string, unknown>) => ({ ...req, path: o.path() }) }],
    setupClient: (client: { setHeaders: (h: Record<string, string>) => void }) => client.setHeaders({ authorization: `Bearer ${o.tokens[next++ % o.tokens.length]}` }),
  }) as unknown as NodeJS.EventEmitter & PromiseLike<{ errors?: number; timeouts?: number }>;
  instance.on('response', (_c: unknown, status: number, b: number, ms: number) => {
    latencies.push(ms);
    bytes += b;
    statuses.set(status, (statuses.get(status) ?? 0) + 1);
  });
  const result = await instance;
  latencies.sort((a, b) => a - b);
  const non200 = [...statuses].filter(([s]) => s !== 200).reduce((n, [, c]) => n + c, 0);
  return { requests: latencies.length, p50: percentile(latencies, 50), p95: percentile(latencies, 95), kb: latencies.length ? bytes / latencies.length / 1024 : NaN, errors: (result.errors ?? 0) + (result.timeouts ?? 0) + non200, statuses: Object.fromEntries(statuses) };
}

const rssKb = (pid: number) => {
  try {
    const m = /VmRSS:\s+(\d+)/.exec(fs.readFileSync(`/proc/${pid}/status`, 'utf8'));
    return m ? Number(m[1]) : NaN;
  } catch {
    return NaN;
  }
};

/** The app's node process (the child of npx or the node itself). */
function nodePid(pid: number): number {
  try {
    const children = fs.readFileSync(`/proc/${pid}/task/${pid}/children`, 'utf8').trim().split(/\s+/).filter(Boolean).map(Number);
    return children.length ? nodePid(children[0]!) : pid;
  } catch {
    return pid;
  }
}

async function main() {
  const started = performance.now();
  const { logDir, databaseUrl, appPort, base, env, entry } = await startBenchStack({ root, name: 'fleet', say, keep: flag('--keep'), build: !flag('--no-build') });

  const { default: postgres } = await import('postgres');
  const sql = postgres(databaseUrl, { max: 2, onnotice: () => {} });
  const tokens: string[] = [];
  for (let i = 1; i <= CLIENTS; i++) {
    const [u] = await sql`insert into users (email, name, roles) values (${`bench-fleet-${i}@offsetry.test`}, ${`Bench Quality ${i}`}, '{quality,service}'::text[]) returning id`;
    const token = `ofs_${crypto.randomBytes(24).toString('base64url')}`;
    await sql`insert into api_tokens (user_id, name, token_hash, prefix) values (${u!.id}, 'bench', ${crypto.createHash('sha256').update(token).digest('hex')}, ${token.slice(0, 10)})`;
    tokens.push(token);
  }
  const fleets = [];
  for (const n of SIZES) {
    const prefix = `F${n}`;
    const f = await seedFleet(sql, { units: n, seed: 42 + n, prefix });
    fleets.push({ n, ...f });
    say(`seeded ${n} units × 5 sets, ${f.counts.exportLog} export log entries in ${f.seconds.toFixed(1)} s`);
  }

  const app = spawnLogged('app', process.execPath, [entry], { cwd: root, env, logFile: path.join(logDir, 'app.log') });
  onShutdown(() => app.stop());
  await waitForPort(appPort, { proc: app, timeoutMs: 60_000, what: 'the app' });
  const appPid = nodePid(app.pid);
  const headers = { authorization: `Bearer ${tokens[0]}`, origin: base };
  await fetch(`${base}/api/me`, { headers });
  say(`stack ready in ${((performance.now() - started) / 1000).toFixed(0)} s · ${base}`);

  const rows: { n: number; snapshotS: number; jobS: number; loads: { name: string; r: Awaited<ReturnType<typeof load>> }[]; exportS?: number; exportMb?: number; exportRssMb?: number }[] = [];
  for (const f of fleets) {
    // First computation of the fleet's statistics (the request queues it; 202 while it runs).
    let t = performance.now();
    let status = 0;
    let body: { snapshot?: { durationMs: number } } = {};
    while (status !== 200 && performance.now() - t < SNAPSHOT_LIMIT_MS) {
      const res = await fetch(`${base}/api/arm-models/${f.modelId}/fleet`, { headers });
      status = res.status;
      body = (await res.json()) as typeof body;
      if (status !== 200 && status !== 202) throw new Error(`fleet statistics of ${f.n} units: ${status} ${JSON.stringify(body).slice(0, 300)}`);
    }
    const snapshotS = (performance.now() - t) / 1000;
    const jobS = (body.snapshot?.durationMs ?? NaN) / 1000;
    say(`${f.n} units: first snapshot after ${snapshotS.toFixed(1)} s (job ${jobS.toFixed(1)} s)`);
    const pick = <T,>(xs: T[]) => xs[Math.floor(Math.random() * xs.length)]!;
    const fleetPages = Math.max(1, Math.ceil(f.n / 25));
    const logPages = Math.max(1, Math.ceil(f.counts.exportLog / 25));
    const endpoints = [
      { name: 'fleet statistics (page of 25)', path: () => `/api/arm-models/${f.modelId}/fleet?page=${1 + Math.floor(Math.random() * Math.min(fleetPages, 20))}` },
      { name: 'drift of a unit', path: () => `/api/units/${pick(f.serials)}/drift` },
      { name: 'units: model + search', path: () => `/api/units?model=${f.modelId}&q=${pick(f.serials).slice(-4)}` },
      { name: 'units: site filter, page', path: () => `/api/units?site=${encodeURIComponent(`Plant ${'ABCDEFGHIJKL'[Math.floor(Math.random() * 12)]} hall ${1 + Math.floor(Math.random() * 7)}`)}&page=${1 + Math.floor(Math.random() * 3)}` },
      { name: 'units: model, page', path: () => `/api/units?model=${f.modelId}&page=${1 + Math.floor(Math.random() * Math.min(20, Math.ceil(f.n / 25)))}` },
      { name: 'export log (page of 25)', path: () => `/api/exports?page=${1 + Math.floor(Math.random() * Math.min(logPages, 40))}` },
      // The export picker searches every unit with a current set; `F<n>-R6-` matches this fleet's units only.
      { name: 'export picker: fleet, page of 50', path: () => `/api/exports/units?q=F${f.n}-R6-&page=${1 + Math.floor(Math.random() * Math.min(20, Math.ceil(f.n / 50)))}` },
      { name: 'export picker: one serial', path: () => `/api/exports/units?q=${pick(f.serials)}` },
    ];
    for (const e of endpoints) {
      for (let i = 0; i < 5; i++) {
        const res = await fetch(base + e.path(), { headers });
        if (res.status !== 200) throw new Error(`warm-up ${e.name}: ${res.status} ${(await res.text()).slice(0, 300)}`);
        await res.arrayBuffer();
      }
    }
    const loads = [];
    for (const e of endpoints) loads.push({ name: e.name, r: await load({ base, tokens, path: e.path, duration: DURATION }) });
    const row: (typeof rows)[number] = { n: f.n, snapshotS, jobS, loads };
    if (f.n >= EXPORT_UNITS) {
      const serials = f.serials.slice(0, EXPORT_UNITS);
      const before = rssKb(appPid);
      let peak = before;
      const sampler = setInterval(() => (peak = Math.max(peak, rssKb(appPid))), 50);
      t = performance.now();
      const res = await fetch(`${base}/api/exports`, { method: 'POST', headers: { ...headers, 'content-type': 'application/json' }, body: JSON.stringify({ serials }) });
      let bytes = 0;
      for await (const chunk of res.body as unknown as AsyncIterable<Uint8Array>) bytes += chunk.byteLength;
      clearInterval(sampler);
      if (res.status !== 200) throw new Error(`batch export: ${res.status}`);
      row.exportS = (performance.now() - t) / 1000;
      row.exportMb = bytes / 1048576;
      row.exportRssMb = (peak - before) / 1024;
      say(`${f.n} units: batch export of ${EXPORT_UNITS} units ${row.exportMb.toFixed(1)} MB in ${row.exportS.toFixed(1)} s, app RSS +${row.exportRssMb.toFixed(0)} MB`);
    }
    rows.push(row);
  }
  await sql.end();

  const fx = (v: number | undefined, d = 0) => (v !== undefined && Number.isFinite(v) ? v.toFixed(d) : '–');
  console.log('');
  console.log(`Fleet reads: ${CLIENTS} concurrent clients (one API token each), ${DURATION} s per endpoint, loopback; target p95 < ${TARGET_P95_MS} ms, 0 errors`);
  console.log('units   endpoint                          req    p50 ms   p95 ms   kB/resp  errors  target');
  for (const r of rows) {
    for (const l of r.loads) {
      const ok = l.r.errors === 0 && l.r.p95 < TARGET_P95_MS;
      console.log(`${String(r.n).padEnd(7)} ${l.name.padEnd(32)} ${String(l.r.requests).padStart(5)} ${fx(l.r.p50, 1).padStart(9)} ${fx(l.r.p95, 1).padStart(8)} ${fx(l.r.kb, 1).padStart(9)} ${String(l.r.errors).padStart(7)}  ${ok ? 'met' : 'MISSED'}`);
      if (l.r.errors) console.log(`        statuses: ${JSON.stringify(l.r.statuses)}`);
    }
  }
  console.log('');
  console.log('units   first statistics: request → 200 s (job s)   batch export of 1 000 units: s, MB, app RSS growth MB');
  for (const r of rows) console.log(`${String(r.n).padEnd(7)} ${fx(r.snapshotS, 1).padStart(8)} (${fx(r.jobS, 1)})${' '.repeat(26)}${r.exportS === undefined ? '–' : `${fx(r.exportS, 1)} s, ${fx(r.exportMb, 1)} MB, +${fx(r.exportRssMb)} MB`}`);
  console.log(`(machine: ${os.cpus().length} CPUs, load average ${os.loadavg().map((l) => l.toFixed(1)).join(' ')}; the load generator, the app, its workers and PostgreSQL share them; run ${((performance.now() - started) / 1000).toFixed(0)} s)`);
}

main()
  .catch((err) => {
    console.error(`[bench-fleet] ${err instanceof StartError ? err.message : (err?.stack ?? err)}`);
    process.exitCode = 1;
  })
  .finally(() => shutdown());
