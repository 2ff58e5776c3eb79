/**
 * The throw-away stack the app benchmarks run against (scripts/bench-scale.ts, scripts/bench-fleet.ts): a
 * PostgreSQL cluster with durability off (PostgreSQL docs, "Non-Durable Settings": throw-away data), the S3
 * and mail fakes, all on free loopback ports in a temporary folder, the database migrated and the app built
 * into that folder (or `dist/` with `--no-build`). Everything stops at shutdown (scripts/lib/proc.mjs);
 * `keep` leaves the folder for its logs.
 */
import crypto from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { startMailFake, startS3Fake } from './fakes.mjs';
import { findFreePorts } from './ports.mjs';
import { ensurePgBin, pgCluster, prepareClusterDir } from './postgres.mjs';
import { localBin, onShutdown, run, StartError } from './proc.mjs';

export interface BenchStack {
  runDir: string;
  logDir: string;
  databaseUrl: string;
  appPort: number;
  base: string;
  /** The app's environment (production mode, loopback services). */
  env: NodeJS.ProcessEnv;
  /** The built server entry to start with node. */
  entry: string;
}

/** A local binary of the project, or npx without installing. */
export function tool(root: string, name: string, args: string[]): [string, string[]] {
  const bin = localBin(root, name);
  return bin ? [bin, args] : ['npx', ['--no-install', name, ...args]];
}

export async function startBenchStack(options: { root: string; name: string; say: (line: string) => void; keep: boolean; build: boolean }): Promise<BenchStack> {
  const { root, say } = options;
  const runDir = fs.mkdtempSync(`/tmp/offsetry-bench-${options.name}-`);
  fs.chmodSync(runDir, 0o755);
  const logDir = path.join(runDir, 'logs');
  fs.mkdirSync(logDir);
  fs.symlinkSync(path.join(root, 'node_modules'), path.join(runDir, 'node_modules'), 'dir');
  onShutdown(() => (options.keep ? say(`kept ${runDir}`) : fs.rmSync(runDir, { recursive: true, force: true })));
  const [pgPort, s3Port, smtpPort, mailApiPort, appPort] = await findFreePorts(5);
  const cluster = pgCluster({
    bin: await ensurePgBin({ log: say }),
    dir: await prepareClusterDir(path.join(runDir, 'pg')),
    port: pgPort,
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
  const env: NodeJS.ProcessEnv = {
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
  };
  delete env.OFFSETRY_OUT_DIR;
  const [tsx, tsxArgs] = tool(root, 'tsx', ['scripts/migrate.ts']);
  if ((await run(tsx, tsxArgs, { cwd: root, env, logFile: path.join(logDir, 'migrate.log'), allowFail: true })).code !== 0) throw new StartError('migrate failed', path.join(logDir, 'migrate.log'));
  let entry = path.join(root, 'dist', 'server', 'entry.mjs');
  if (options.build) {
    const outDir = path.join(runDir, 'dist');
    const [astro, astroArgs] = tool(root, 'astro', ['build']);
    if ((await run(astro, astroArgs, { cwd: root, env: { ...env, OFFSETRY_OUT_DIR: outDir }, logFile: path.join(logDir, 'build.log'), allowFail: true })).code !== 0) throw new StartError('astro build failed', path.join(logDir, 'build.log'));
    entry = path.join(outDir, 'server', 'entry.mjs');
  }
  return { runDir, logDir, databaseUrl, appPort, base, env, entry };
}
