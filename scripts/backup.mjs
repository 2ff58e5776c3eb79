#!/usr/bin/env node
// Back up Offsetry: a pg_dump of DATABASE_URL (custom format) and the list of every S3 object the database
// refers to, each checked in the bucket. See the README, "Backups".
//
//   node scripts/backup.mjs [--out DIR] [--no-check]
//     --out DIR    where to write (default .data/backups/<UTC time>); created, must be empty if it exists
//     --no-check   do not ask the bucket whether each object exists (list only)
//
// Writes DIR/database.dump (pg_restore format) and DIR/objects.json. Both describe the same moment: the list
// is read in a REPEATABLE READ transaction whose snapshot pg_dump shares (--snapshot), so a session uploaded
// during the backup is in both or in neither. The objects themselves are not copied: the bucket keeps them
// (use the store's versioning or replication; objects are never changed or deleted by the app).
//
// Environment: DATABASE_URL, S3_ENDPOINT (optional for AWS), S3_REGION, S3_BUCKET, S3_ACCESS_KEY_ID,
// S3_SECRET_ACCESS_KEY, S3_FORCE_PATH_STYLE; PG_BIN (folder holding pg_dump; else Debian's newest, else PATH).
// Exit codes: 0 all good · 3 written, but objects are missing in the bucket · 1 failed (nothing usable).
import { spawn } from 'node:child_process';
import { createHash } from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { findPgBin } from './lib/postgres.mjs';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');

/** @param {string[]} argv */
function parseArgs(argv) {
  /** @type {{ out?: string, check: boolean }} */
  const opts = { check: true };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    if (a === '--out') opts.out = argv[++i];
    else if (a === '--no-check') opts.check = false;
    else throw new Error(`unknown option ${a} (known: --out DIR, --no-check)`);
  }
  return opts;
}

/** The PostgreSQL client tool `name` from PG_BIN, Debian's folder, or PATH. @param {string} name */
export function pgTool(name) {
  const dirs = [process.env.PG_BIN, findPgBin()].filter(Boolean);
  for (const dir of dirs) {
    const file = path.join(/** @type {string} */ (dir), name);
    if (fs.existsSync(file)) return file;
  }
  return name;
}

/**
 * Connection settings for libpq tools without the password on the command line (it would show in `ps`).
 * @param {string} url
 */
export function libpqTarget(url) {
  const u = new URL(url);
  const password = decodeURIComponent(u.password);
  u.password = '';
  return { uri: u.toString(), env: { ...process.env, ...(password ? { PGPASSWORD: password } : {}) } };
}

/**
 * Run a tool; resolve with its stderr, reject with it.
 * @param {string} cmd @param {string[]} args @param {NodeJS.ProcessEnv} env
 */
export function runTool(cmd, args, env) {
  return new Promise((resolve, reject) => {
    const child = spawn(cmd, args, { env, stdio: ['ignore', 'pipe', 'pipe'] });
    let err = '';
    child.stdout.on('data', (c) => (err += c));
    child.stderr.on('data', (c) => (err += c));
    child.once('error', (e) => reject(new Error(`could not run ${cmd}: ${e.message}`)));
    child.once('close', (code) => (code === 0 ? resolve(err) : reject(new Error(`${path.basename(cmd)} exited with ${code}:\n${err.trim()}`))));
  });
}

/** @param {string} file */
function sha256File(file) {
  return new Promise((resolve, reject) => {
    const h = createHash('sha256');
    fs.createReadStream(file).on('data', (c) => h.update(c)).on('error', reject).on('end', () => resolve(h.digest('hex')));
  });
}

/** S3 client from the same variables the app reads (src/lib/server/s3.ts). */
export async function s3FromEnv() {
  const { S3Client } = await import('@aws-sdk/client-s3');
  const need = ['S3_BUCKET', 'S3_ACCESS_KEY_ID', 'S3_SECRET_ACCESS_KEY'].filter((k) => !process.env[k]);
  if (need.length) throw new Error(`${need.join(', ')} not set (needed to check the objects; --no-check skips that)`);
  const client = new S3Client({
    endpoint: process.env.S3_ENDPOINT || undefined,
    region: process.env.S3_REGION || 'us-east-1',
    forcePathStyle: !['false', '0', 'no'].includes(process.env.S3_FORCE_PATH_STYLE ?? 'true'),
    credentials: { accessKeyId: /** @type {string} */ (process.env.S3_ACCESS_KEY_ID), secretAccessKey: /** @type {string} */ (process.env.S3_SECRET_ACCESS_KEY) },
    requestChecksumCalculation: 'WHEN_REQUIRED',
    responseChecksumValidation: 'WHEN_REQUIRED',
  });
  return { client, bucket: /** @type {string} */ (process.env.S3_BUCKET) };
}

/**
 * HeadObject for every listed object (8 at a time); fills inBucket and bucketBytes.
 * @param {{ key: string, bytes: number, inBucket?: boolean | null, bucketBytes?: number | null, problem?: string }[]} objects
 */
export async function checkObjects(objects) {
  const { HeadObjectCommand } = await import('@aws-sdk/client-s3');
  const { client, bucket } = await s3FromEnv();
  let next = 0;
  const worker = async () => {
    while (next < objects.length) {
      const o = objects[next++];
      try {
        const head = await client.send(new HeadObjectCommand({ Bucket: bucket, Key: o.key }));
        o.inBucket = true;
        o.bucketBytes = head.ContentLength ?? null;
        if (o.bucketBytes !== o.bytes) o.problem = `the bucket holds ${o.bucketBytes} bytes, the database says ${o.bytes}`;
      } catch (e) {
        const status = /** @type {{ $metadata?: { httpStatusCode?: number } }} */ (e).$metadata?.httpStatusCode;
        if (status === 404 || /NotFound|NoSuchKey/.test(String(/** @type {Error} */ (e).name))) {
          o.inBucket = false;
          o.problem = 'not in the bucket';
        } else throw new Error(`S3: could not check ${o.key}: ${/** @type {Error} */ (e).message}`);
      }
    }
  };
  await Promise.all(Array.from({ length: Math.min(8, objects.length) }, worker));
  client.destroy();
  return { bucket };
}

async function main() {
  const opts = parseArgs(process.argv.slice(2));
  if (!process.env.DATABASE_URL && fs.existsSync(path.join(root, '.env'))) process.loadEnvFile(path.join(root, '.env'));
  const url = process.env.DATABASE_URL;
  if (!url) throw new Error('DATABASE_URL is not set');
  const stamp = new Date().toISOString().replace(/[:.]/g, '-');
  const out = path.resolve(opts.out ?? path.join(root, '.data', 'backups', stamp));
  if (fs.existsSync(out) && fs.readdirSync(out).length) throw new Error(`${out} exists and is not empty; choose another --out`);
  fs.mkdirSync(out, { recursive: true });
  const dumpFile = path.join(out, 'database.dump');
  const pgDump = pgTool('pg_dump');
  const target = libpqTarget(url);

  const { default: postgres } = await import('postgres');
  const sql = postgres(url, { max: 1, onnotice: () => {}, connect_timeout: 10 });
  /** @type {{ sessionId: string, unit: string, key: string, bytes: number, sha256: string, inBucket?: boolean | null, bucketBytes?: number | null, problem?: string }[]} */
  let objects = [];
  let migrations = 0;
  try {
    await sql.begin('isolation level repeatable read read only', async (tx) => {
      const [{ snapshot }] = await tx`select pg_export_snapshot() as snapshot`;
      // The list and the dump read the same snapshot while this transaction stays open.
      const rows = await tx`
        select s.id, u.serial, s.file_key, s.file_bytes, s.file_sha256
        from sessions s join units u on u.id = s.unit_id
        order by s.created_at, s.id`;
      objects = rows.map((r) => ({ sessionId: r.id, unit: r.serial, key: r.file_key, bytes: Number(r.file_bytes), sha256: r.file_sha256, inBucket: null }));
      const [m] = await tx`select count(*)::int as n from drizzle.__drizzle_migrations`;
      migrations = m.n;
      await runTool(pgDump, ['--format=custom', '--compress=6', `--snapshot=${snapshot}`, `--file=${dumpFile}`, `--dbname=${target.uri}`], target.env);
    });
  } finally {
    await sql.end({ timeout: 5 });
  }

  let bucket = process.env.S3_BUCKET ?? null;
  if (opts.check && objects.length) bucket = (await checkObjects(objects)).bucket;
  const missing = objects.filter((o) => o.problem);
  const db = new URL(url);
  const manifest = {
    format: 'offsetry-backup/1',
    createdAt: new Date().toISOString(),
    database: { host: db.hostname, port: Number(db.port || 5432), name: db.pathname.slice(1), migrations },
    dump: { file: 'database.dump', bytes: fs.statSync(dumpFile).size, sha256: await sha256File(dumpFile), tool: pgDump },
    storage: { endpoint: process.env.S3_ENDPOINT ?? null, bucket, checked: opts.check },
    objectCount: objects.length,
    objectBytes: objects.reduce((n, o) => n + o.bytes, 0),
    problems: missing.length,
    objects,
  };
  fs.writeFileSync(path.join(out, 'objects.json'), JSON.stringify(manifest, null, 2) + '\n');
  console.log(`backup: ${out}`);
  console.log(`  database.dump  ${manifest.dump.bytes} bytes, ${migrations} migrations applied`);
  console.log(`  objects.json   ${objects.length} session files, ${manifest.objectBytes} bytes${opts.check ? `, checked in bucket ${bucket}` : ' (not checked)'}`);
  for (const o of missing.slice(0, 20)) console.error(`  PROBLEM ${o.key} (session ${o.sessionId}): ${o.problem}`);
  if (missing.length > 20) console.error(`  … and ${missing.length - 20} more (see objects.json)`);
  return missing.length ? 3 : 0;
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  try {
    process.exitCode = await main();
  } catch (e) {
    console.error(`backup failed: ${e instanceof Error ? e.message : e}`);
    process.exitCode = 1;
  }
}
