/**
 * `offsetry upload | pull | status` as a user runs them: the real bin/offsetry.mjs in a child process,
 * against the test run's app, with personal tokens made through the API. Refusals print the server's
 * problems like the local parser prints its own; nothing is written locally on failure.
 */
import { execFile } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, driftAlerts, fits, units } from '../../src/db/schema';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { approveSet, fitAwaitingReview, moved } from '../support/approved-sets';
import { BASE_URL, DEMO, signedIn, uniq, type Client } from '../support/http';
import { testDb } from './fit-fixtures';

const geometry = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
const dir = mkdtempSync(join(tmpdir(), 'offsetry-cli-'));

function offsetry(args: string[], env: Record<string, string | undefined> = {}): Promise<{ code: number; stdout: string; stderr: string }> {
  return new Promise((resolve) => {
    execFile(process.execPath, ['bin/offsetry.mjs', ...args], { env: { ...process.env, OFFSETRY_URL: undefined, OFFSETRY_TOKEN: undefined, ...env }, timeout: 60_000 }, (err, stdout, stderr) => {
      resolve({ code: err ? ((err as { code?: number }).code ?? 99) : 0, stdout, stderr });
    });
  });
}

async function tokenFor(email: string) {
  const c = await signedIn(email);
  const res = await c.json('/api/tokens', { method: 'POST', json: { name: uniq('cli test ') } });
  expect(res.status).toBe(201);
  return { client: c, token: res.body.token as string };
}

let tech: { client: Client; token: string }, service: { client: Client; token: string }, engineer: { client: Client; token: string };
let serial: string, bareSerial: string, setId: string;

beforeAll(async () => {
  [tech, service, engineer] = await Promise.all([tokenFor(DEMO.technician), tokenFor(DEMO.service), tokenFor(DEMO.engineer)]);
  const db = testDb();
  const [model] = await db.insert(armModels).values({ name: uniq('CLI R6 '), manufacturer: 'Invented Arms Ltd.' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry }).returning();
  serial = uniq('CLI-');
  bareSerial = uniq('CLI-BARE-');
  const [unit] = await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Test hall', cell: 'C3' }).returning();
  await db.insert(units).values({ serial: bareSerial, modelRevisionId: rev!.id, site: 'Test hall' });
  const v1 = await approveSet(db, { unitId: unit!.id, revisionId: rev!.id, geometry });
  const v2 = await approveSet(db, { unitId: unit!.id, revisionId: rev!.id, geometry: moved(geometry, { 'J3.a': 0.8 }) });
  await db.insert(driftAlerts).values({ unitId: unit!.id, parameterSetId: v2.setId, previousSetId: v1.setId, details: [{ key: 'J3.a', change: 0.8, tolerance: 0.2, unit: 'mm' }] });
  setId = v2.setId;
  // One fit awaiting review and one running (a row only: no job, so no worker touches it).
  await fitAwaitingReview(db, { unitId: unit!.id, revisionId: rev!.id, geometry });
  await db.insert(fits).values({ sessionId: v2.sessionId, unitId: unit!.id, state: 'running', settings: {}, startedAt: new Date() });
});
afterAll(async () => {
  await testDb().$client.end();
});

const env = (token: string) => ({ OFFSETRY_URL: BASE_URL, OFFSETRY_TOKEN: token });

describe('offsetry upload', () => {
  it('uploads a session and says where it is', async () => {
    const r = await offsetry(['upload', '--unit', serial, '--file', 'test-data/orrin-r6-620-session.csv', '--measured-on', '2026-04-02', '--instrument', 'Invented tracker T-2', '--uncertainty', '±(20 µm + 8 µm/m), k = 2', '--notes', 'from the CLI test'], env(tech.token));
    expect(r.code, r.stderr).toBe(0);
    const id = /session ([0-9a-f-]{36}), (\d+) poses/.exec(r.stdout);
    expect(id, r.stdout).not.toBeNull();
    const got = await tech.client.json(`/api/sessions/${id![1]}`);
    expect(got.body.session).toMatchObject({ instrument: 'Invented tracker T-2', instrumentUncertainty: '±(20 µm + 8 µm/m), k = 2', notes: 'from the CLI test', measuredOn: '2026-04-02', poseCount: Number(id![2]) });
    // Byte for byte what was on disk.
    const file = await tech.client.fetch(`/api/sessions/${id![1]}/file`);
    expect(Buffer.from(await file.arrayBuffer()).equals(readFileSync('test-data/orrin-r6-620-session.csv'))).toBe(true);
  });

  it('prints the server\'s line/field problems exactly like the local parser, and stores nothing', async () => {
    const file = 'test-data/bad/non-numeric-cell.csv';
    const local = await offsetry(['check', '--model', 'test-data/orrin-r6-620-nominal.json', '--data', file]);
    expect(local.code).toBe(1);
    const remote = await offsetry(['upload', '--unit', serial, '--file', file, '--measured-on', '2026-04-03'], env(tech.token));
    expect(remote.code).toBe(1);
    const problemLines = (s: string) => s.split('\n').filter((l) => l.startsWith('  '));
    expect(problemLines(local.stderr).length).toBeGreaterThan(0);
    expect(problemLines(remote.stderr)).toEqual(problemLines(local.stderr));
    expect(remote.stderr).toContain(`${file}, line 3, field q2:`);
    const list = await tech.client.json(`/api/sessions?unit=${serial}`);
    expect(list.body.sessions.every((s: { measuredOn: string }) => s.measuredOn !== '2026-04-03')).toBe(true);
  });

  it('names a bad form field the way the server names it', async () => {
    const r = await offsetry(['upload', '--unit', serial, '--file', 'test-data/orrin-r6-620-session.csv', '--measured-on', '2026-02-30'], env(tech.token));
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/field measuredOn: measuredOn is not a calendar date/);
  });

  it('shows a progress bar for a large file', async () => {
    const [header, ...rows] = readFileSync('test-data/orrin-r6-620-session.csv', 'utf8').trim().split('\n');
    const big = [header, ...Array.from({ length: 45 }, (_, k) => rows.map((r) => r.replace(/^P/, `R${k}-`))).flat()].join('\n') + '\n';
    const path = join(dir, 'big-session.csv');
    writeFileSync(path, big);
    expect(big.length).toBeGreaterThan(256 * 1024);
    const r = await offsetry(['upload', '--unit', serial, '--file', path, '--measured-on', '2026-04-04'], env(tech.token));
    expect(r.code, r.stderr).toBe(0);
    const bars = r.stderr.split('\n').filter((l) => l.startsWith('uploading ['));
    expect(bars.length).toBeGreaterThanOrEqual(3);
    expect(bars.at(-1)).toMatch(/100%/);
  });

  it('exits 2 without a server or token, and 4 with a revoked token', async () => {
    const none = await offsetry(['upload', '--unit', serial, '--file', 'test-data/orrin-r6-620-session.csv', '--measured-on', '2026-04-02']);
    expect(none.code).toBe(2);
    expect(none.stderr).toContain('OFFSETRY_URL');
    const bad = await offsetry(['status', '--unit', serial, '--server', BASE_URL, '--token', 'ofs_not-a-real-token']);
    expect(bad.code).toBe(4);
  });
});

describe('offsetry pull', () => {
  it.each(['json', 'csv', 'urdf'])('writes the current set as %s, the same bytes the export answers', async (format) => {
    const out = join(dir, `pull.${format}`);
    const r = await offsetry(['pull', '--unit', serial, '--format', format, '--out', out], env(service.token));
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toContain('parameter set v2');
    expect(r.stderr).toContain('reduced speed');
    const direct = await service.client.fetch(`/api/parameter-sets/${setId}/export?format=${format}`);
    const bytes = Buffer.from(await direct.arrayBuffer());
    expect(createHash('sha256').update(readFileSync(out)).digest('hex')).toBe(createHash('sha256').update(bytes).digest('hex'));
    if (format === 'json') expect(JSON.parse(readFileSync(out, 'utf8')).joints[2].a).toBe(moved(geometry, { 'J3.a': 0.8 }).joints[2]!.a);
  });

  it('exits 6 and writes nothing when the unit has no approved set', async () => {
    const out = join(dir, 'none.json');
    const r = await offsetry(['pull', '--unit', bareSerial, '--out', out], env(service.token));
    expect(r.code).toBe(6);
    expect(r.stderr).toContain('no approved parameter set');
    expect(existsSync(out)).toBe(false);
  });

  it('writes nothing when the server refuses (roles, unknown unit, unknown format)', async () => {
    const out = join(dir, 'refused.json');
    const denied = await offsetry(['pull', '--unit', serial, '--out', out], env(tech.token));
    expect(denied.code).toBe(4);
    const unknown = await offsetry(['pull', '--unit', uniq('NOPE-'), '--out', out], env(service.token));
    expect(unknown.code).toBe(1);
    const format = await offsetry(['pull', '--unit', serial, '--format', 'pdf', '--out', out], env(service.token));
    expect(format.code).toBe(2);
    expect(existsSync(out)).toBe(false);
    expect(readdirSync(dir).filter((f) => f.endsWith('.tmp'))).toEqual([]);
  });
});

describe('offsetry status', () => {
  it('shows the current version, open fits and reviews, and open drift alerts', async () => {
    const r = await offsetry(['status', '--unit', serial], env(engineer.token));
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toContain('current parameter set: v2');
    expect(r.stdout).toMatch(/open fits \(queued or running\): 1\n {2}fit [0-9a-f-]{36} {2}running/);
    expect(r.stdout).toMatch(/fits awaiting review: 1\n {2}fit [0-9a-f-]{36} {2}fitted \/ awaiting_review/);
    expect(r.stdout).toMatch(/open drift alerts: 1\n {2}alert [0-9a-f-]{36} {2}v2 .*J3\.a 0\.800 mm \(tolerance 0\.2 mm\)/);
    const json = await offsetry(['status', '--unit', serial, '--json'], env(engineer.token));
    const parsed = JSON.parse(json.stdout);
    expect(parsed.current.id).toBe(setId);
    expect(parsed.openAlerts).toHaveLength(1);
    expect(parsed.openFits).toHaveLength(1);
    expect(parsed.awaitingReview).toHaveLength(1);
  });

  it('names the sections the token\'s roles may not read', async () => {
    const r = await offsetry(['status', '--unit', serial], env(service.token));
    expect(r.code, r.stderr).toBe(0);
    expect(r.stdout).toContain('current parameter set: v2');
    expect(r.stdout).toContain("open drift alerts: not visible to this token's roles");
  });
});
