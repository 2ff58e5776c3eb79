/**
 * Backup and restore with the real tools: a source database of its own (migrated, served by its own app
 * instance, sessions uploaded through the API so their objects really are in the S3 fake), dumped by
 * scripts/backup.mjs, restored by scripts/restore.mjs into a second, empty database of the same cluster;
 * every restored session's object is then found in the bucket, byte for byte.
 *
 * A database of its own, because the shared test database holds fixture sessions written straight into
 * SQL without objects (tests/integration/fit-fixtures.ts); here "every session" can be checked literally.
 */
import { GetObjectCommand, HeadObjectCommand } from '@aws-sdk/client-s3';
import { spawn } from 'node:child_process';
import { createHash } from 'node:crypto';
import { cpSync, existsSync, readFileSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, units } from '../../src/db/schema';
import { createDb, type Db } from '../../src/lib/server/db';
import { upsertUserWithPassword } from '../../src/lib/server/users';
import { Client, uniq } from '../support/http';
import { serviceEnv, startAppInstance, type AppInstance } from '../support/services';
import { testS3 } from '../support/s3';

const root = resolve(new URL('../..', import.meta.url).pathname);
const env = serviceEnv();
const tag = uniq().toLowerCase().replace(/[^a-z0-9]/g, '');
const appUser = decodeURIComponent(new URL(env.databaseUrl).username);
const dbUrl = (name: string) => {
  const u = new URL(env.databaseUrl);
  u.pathname = `/${name}`;
  return u.toString();
};
const sourceName = `backup_src_${tag}`;
const targetName = `backup_dst_${tag}`;
const sourceUrl = dbUrl(sourceName);
const targetUrl = dbUrl(targetName);
const backupDir = join(env.runDir, `backup-${tag}`);
const s3 = testS3();

function run(cmd: string, args: string[], extraEnv: Record<string, string> = {}): Promise<{ code: number | null; out: string }> {
  return new Promise((done) => {
    const child = spawn(cmd, args, { cwd: root, env: { ...process.env, ...extraEnv } });
    let out = '';
    child.stdout.on('data', (c) => (out += c));
    child.stderr.on('data', (c) => (out += c));
    child.once('exit', (code) => done({ code, out }));
  });
}

/** psql as the cluster's superuser over its socket (local connections are trusted in the test cluster). */
async function superSql(statement: string) {
  const res = await run(join(env.pg.bin, 'psql'), ['-X', '-q', '-v', 'ON_ERROR_STOP=1', '-h', env.pg.socketDir, '-p', String(env.pg.port), '-U', 'postgres', '-d', 'postgres', '-c', statement]);
  if (res.code !== 0) throw new Error(`psql ${statement}: ${res.out}`);
}

let source: Db;
let app: AppInstance;
const uploaded: { id: string; bytes: number; sha256: string }[] = [];

beforeAll(async () => {
  await superSql(`CREATE DATABASE ${sourceName} OWNER ${appUser}`);
  const migrate = await run(join(root, 'node_modules/.bin/tsx'), ['scripts/migrate.ts'], { DATABASE_URL: sourceUrl });
  expect(migrate.code, migrate.out).toBe(0);
  source = createDb(sourceUrl, { max: 2 });
  const email = `backup-${tag}@offsetry.test`;
  await upsertUserWithPassword({ email, name: 'Backup Tech', roles: ['technician'], password: 'backup test password 1' }, source);
  const geometry = JSON.parse(readFileSync(join(root, 'test-data/orrin-r6-620-nominal.json'), 'utf8'));
  const [model] = await source.insert(armModels).values({ name: `BK-R6-${tag}`, description: 'backup test' }).returning();
  const [rev] = await source.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry }).returning();
  app = await startAppInstance({ DATABASE_URL: sourceUrl, RUN_WORKER: 'false' });
  const client = new Client(app.url);
  expect(await client.signIn(email, 'backup test password 1')).not.toMatch(/error=/);
  const base = readFileSync(join(root, 'test-data/orrin-r6-620-session.csv'), 'utf8');
  for (let k = 0; k < 3; k++) {
    const serial = `BK-${tag}-${k}`.toUpperCase();
    await source.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Backup hall' });
    // Each file differs by its trailing blank lines, so the three uploads have three different digests.
    const file = Buffer.from(base + '\n'.repeat(k));
    const form = new FormData();
    form.append('unit', serial);
    form.append('measuredOn', '2025-04-0' + (k + 1));
    form.append('file', new Blob([file], { type: 'text/csv' }), `visit-${k}.csv`);
    const res = await client.json('/api/sessions', { method: 'POST', body: form });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    uploaded.push({ id: res.body.id, bytes: file.length, sha256: createHash('sha256').update(file).digest('hex') });
  }
}, 120_000);

afterAll(async () => {
  await app?.stop().catch(() => undefined);
  await source?.$client.end();
  for (const name of [sourceName, targetName]) await superSql(`DROP DATABASE IF EXISTS ${name} WITH (FORCE)`).catch(() => undefined);
});

describe('backup and restore', () => {
  it('backs up the database and lists every session object, checked in the bucket', async () => {
    const res = await run(process.execPath, ['scripts/backup.mjs', '--out', backupDir], { DATABASE_URL: sourceUrl });
    expect(res.code, res.out).toBe(0);
    expect(existsSync(join(backupDir, 'database.dump'))).toBe(true);
    const manifest = JSON.parse(readFileSync(join(backupDir, 'objects.json'), 'utf8'));
    expect(manifest.format).toBe('offsetry-backup/1');
    expect(manifest.objectCount).toBe(3);
    expect(manifest.problems).toBe(0);
    expect(manifest.dump.sha256).toBe(createHash('sha256').update(readFileSync(join(backupDir, 'database.dump'))).digest('hex'));
    const byId = new Map(manifest.objects.map((o: { sessionId: string }) => [o.sessionId, o]));
    for (const u of uploaded) {
      expect(byId.get(u.id)).toMatchObject({ bytes: u.bytes, sha256: u.sha256, inBucket: true, bucketBytes: u.bytes });
    }
    // The custom format is pg_restore's: its table of contents names our tables.
    const toc = await run(join(env.pg.bin, 'pg_restore'), ['--list', join(backupDir, 'database.dump')]);
    expect(toc.code).toBe(0);
    for (const table of ['sessions', 'session_poses', 'units', 'parameter_sets', '__drizzle_migrations']) expect(toc.out).toContain(table);
  });

  it('restores into an empty database, and every restored session finds its object', async () => {
    await superSql(`CREATE DATABASE ${targetName} OWNER ${appUser}`);
    const res = await run(process.execPath, ['scripts/restore.mjs', '--from', backupDir, '--database-url', targetUrl, '--check-objects']);
    expect(res.code, res.out).toBe(0);
    expect(res.out).toMatch(/3 of 3 session files found/);

    const restored = createDb(targetUrl, { max: 1 });
    try {
      const rows = await restored.query.sessions.findMany();
      expect(rows.map((r) => r.id).sort()).toEqual(uploaded.map((u) => u.id).sort());
      for (const row of rows) {
        expect(row.fileKey).toMatch(/^sessions\/BK-/);
        const head = await s3.send(new HeadObjectCommand({ Bucket: env.s3.bucket, Key: row.fileKey }));
        expect(head.ContentLength).toBe(row.fileBytes);
        const body = await (await s3.send(new GetObjectCommand({ Bucket: env.s3.bucket, Key: row.fileKey }))).Body!.transformToByteArray();
        expect(createHash('sha256').update(body).digest('hex')).toBe(row.fileSha256);
      }
      // The rest came back too: poses, and the immutability trigger of parameter sets.
      const poses = await restored.$client`select count(*)::int as n from session_poses`;
      expect(poses[0]!.n).toBeGreaterThan(0);
      const triggers = await restored.$client`select count(*)::int as n from pg_trigger where tgrelid = 'parameter_sets'::regclass and not tgisinternal`;
      expect(triggers[0]!.n).toBeGreaterThan(0);
    } finally {
      await restored.$client.end();
    }
  });

  it('refuses to restore into a database that is not empty', async () => {
    const res = await run(process.execPath, ['scripts/restore.mjs', '--from', backupDir, '--database-url', sourceUrl]);
    expect(res.code).toBe(2);
    expect(res.out).toMatch(/restore refused: the target database is not empty \(\d+ relations: .*public\.arm_models/);
  });

  it('refuses a dump that does not match its manifest', async () => {
    const damaged = `${backupDir}-damaged`;
    cpSync(backupDir, damaged, { recursive: true });
    const dump = readFileSync(join(damaged, 'database.dump'));
    dump[dump.length - 10] ^= 0xff;
    writeFileSync(join(damaged, 'database.dump'), dump);
    const res = await run(process.execPath, ['scripts/restore.mjs', '--from', damaged, '--database-url', targetUrl]);
    expect(res.code).toBe(2);
    expect(res.out).toMatch(/does not match the SHA-256/);
  });

  it('reports objects missing from the bucket with exit code 3', async () => {
    // A row whose object was never stored (written straight into SQL, as fixtures do).
    const [u] = await source.select({ id: units.id, rev: units.modelRevisionId }).from(units).limit(1);
    await source.$client`
      insert into sessions (unit_id, model_revision_id, measured_on, file_name, file_key, file_sha256, file_bytes, pose_count, joint_count)
      values (${u!.id}, ${u!.rev}, '2025-05-01', 'ghost.csv', ${`sessions/GHOST-${tag}/ghost.csv`}, ${'0'.repeat(64)}, 10, 0, 6)`;
    const out = `${backupDir}-missing`;
    const res = await run(process.execPath, ['scripts/backup.mjs', '--out', out], { DATABASE_URL: sourceUrl });
    expect(res.code, res.out).toBe(3);
    expect(res.out).toMatch(/PROBLEM sessions\/GHOST-.*not in the bucket/);
    const manifest = JSON.parse(readFileSync(join(out, 'objects.json'), 'utf8'));
    expect(manifest.problems).toBe(1);
    expect(manifest.objectCount).toBe(4);
  });
});
