#!/usr/bin/env node
// Restore a backup made by scripts/backup.mjs into an EMPTY database. See the README, "Backups".
//
//   node scripts/restore.mjs --from DIR [--database-url URL] [--check-objects]
//     --from DIR         the backup folder (database.dump and objects.json)
//     --database-url     the target (default DATABASE_URL); it must hold no tables, views or sequences
//     --check-objects    afterwards, look up every restored session's object in the bucket (S3_* variables)
//
// Refuses a database that holds anything, so a restore can never mix with or overwrite live data: create a
// fresh database (CREATE DATABASE … OWNER …), restore into it, check, then point DATABASE_URL at it.
// Ownership and grants in the dump are not restored: everything belongs to the user of the target URL.
// Exit codes: 0 restored · 2 refused (target not empty, dump damaged) · 3 restored, objects missing · 1 failed.
import fs from 'node:fs';
import path from 'node:path';
import { createHash } from 'node:crypto';
import { fileURLToPath } from 'node:url';
import { checkObjects, libpqTarget, pgTool, runTool } from './backup.mjs';

class Refused extends Error {}

/** @param {string[]} argv */
function parseArgs(argv) {
  /** @type {{ from?: string, url?: string, checkObjects: boolean }} */
  const opts = { checkObjects: false };
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    if (a === '--from') opts.from = argv[++i];
    else if (a === '--database-url') opts.url = argv[++i];
    else if (a === '--check-objects') opts.checkObjects = true;
    else throw new Error(`unknown option ${a} (known: --from DIR, --database-url URL, --check-objects)`);
  }
  if (!opts.from) throw new Error('--from DIR is required (a folder written by scripts/backup.mjs)');
  return opts;
}

async function main() {
  const opts = parseArgs(process.argv.slice(2));
  const dir = path.resolve(/** @type {string} */ (opts.from));
  const dumpFile = path.join(dir, 'database.dump');
  const manifestFile = path.join(dir, 'objects.json');
  if (!fs.existsSync(dumpFile)) throw new Refused(`${dumpFile} does not exist`);
  const manifest = fs.existsSync(manifestFile) ? JSON.parse(fs.readFileSync(manifestFile, 'utf8')) : undefined;
  if (manifest?.dump?.sha256) {
    const digest = createHash('sha256').update(fs.readFileSync(dumpFile)).digest('hex');
    if (digest !== manifest.dump.sha256) throw new Refused(`${dumpFile} does not match the SHA-256 in objects.json (damaged or replaced)`);
  }
  const url = opts.url ?? process.env.DATABASE_URL;
  if (!url) throw new Error('no target: pass --database-url or set DATABASE_URL');

  const { default: postgres } = await import('postgres');
  const sql = postgres(url, { max: 1, onnotice: () => {}, connect_timeout: 10 });
  try {
    // public first: the message should name the application's own tables before any queue or migration schema.
    const [{ n, names }] = await sql`
      select count(*)::int as n, coalesce(string_agg(n.nspname || '.' || c.relname, ', ' order by n.nspname <> 'public', n.nspname, c.relname), '') as names
      from pg_class c join pg_namespace n on n.oid = c.relnamespace
      where c.relkind in ('r', 'p', 'v', 'm', 'S', 'f')
        and n.nspname not in ('pg_catalog', 'information_schema') and n.nspname not like 'pg_toast%' and n.nspname not like 'pg_temp%'`;
    if (n > 0) {
      const list = names.length > 300 ? `${names.slice(0, 300)} …` : names;
      throw new Refused(`the target database is not empty (${n} relations: ${list}); restore only into a new, empty database`);
    }
    const target = libpqTarget(url);
    await runTool(
      pgTool('pg_restore'),
      ['--no-owner', '--no-privileges', '--exit-on-error', '--single-transaction', `--dbname=${target.uri}`, dumpFile],
      target.env,
    );
    const rows = await sql`select s.id, s.file_key, s.file_bytes from sessions s order by s.created_at, s.id`;
    const [m] = await sql`select count(*)::int as n from drizzle.__drizzle_migrations`;
    console.log(`restore: ${dumpFile} → ${new URL(url).pathname.slice(1)} (${rows.length} sessions, ${m.n} migrations)`);
    if (manifest && manifest.objectCount !== rows.length) {
      throw new Error(`objects.json lists ${manifest.objectCount} session files but the restored database has ${rows.length} sessions`);
    }
    if (!opts.checkObjects || !rows.length) return 0;
    const objects = rows.map((r) => ({ key: r.file_key, bytes: Number(r.file_bytes), inBucket: /** @type {boolean | null} */ (null), bucketBytes: /** @type {number | null} */ (null), problem: /** @type {string | undefined} */ (undefined) }));
    const { bucket } = await checkObjects(objects);
    const missing = objects.filter((o) => o.problem);
    console.log(`  ${objects.length - missing.length} of ${objects.length} session files found in bucket ${bucket}`);
    for (const o of missing.slice(0, 20)) console.error(`  PROBLEM ${o.key}: ${o.problem}`);
    return missing.length ? 3 : 0;
  } finally {
    await sql.end({ timeout: 5 });
  }
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  try {
    process.exitCode = await main();
  } catch (e) {
    console.error(`restore ${e instanceof Refused ? 'refused' : 'failed'}: ${e instanceof Error ? e.message : e}`);
    process.exitCode = e instanceof Refused ? 2 : 1;
  }
}
