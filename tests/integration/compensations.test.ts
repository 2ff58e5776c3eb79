/**
 * Compensated programs through the API: upload (multipart) → job → summary → download (read back with
 * csv-parse), checksums of both stored files, the export log entry, refusals (file, line, field; nothing
 * stored), a unit without a current set, and a 10 000-target program run as a job.
 */
import { createHash } from 'node:crypto';
import { parse } from 'csv-parse/sync';
import { eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { compensations } from '../../src/db/schema';
import { IkSolver } from '../../src/lib/engine/ik';
import { anglesFromRotation } from '../../src/lib/engine/rotations';
import { createDb } from '../../src/lib/server/db';
import { r6Nominal, r6True } from '../engine/make-test-data';
import { approveSet, makeModel, makeUnit } from '../support/approved-sets';
import { DEMO, signedIn, type Client } from '../support/http';
import { poll } from '../support/wait';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
afterAll(() => db.$client.end());
const sha = (b: Uint8Array | string) => createHash('sha256').update(b).digest('hex');

const nominal = r6Nominal();
const calibrated = r6True();
const onCalibrated = new IkSolver({ ...calibrated, base: undefined });

function upload(client: Client, serial: string, csv: string, name = 'drill.csv', fields: Record<string, string> = {}) {
  const form = new FormData();
  for (const [k, v] of Object.entries(fields)) form.set(k, v);
  form.set('file', new Blob([csv], { type: 'text/csv' }), name);
  return client.json(`/api/units/${encodeURIComponent(serial)}/compensations`, { method: 'POST', body: form });
}

async function finished(client: Client, id: string, timeoutMs = 60_000) {
  const { value } = await poll(
    // A reused keep-alive socket closed by the server at the same moment resets the request (undici); ask again.
    () => client.json(`/api/compensations/${id}`).catch(() => ({ status: 0, body: { state: 'unknown' } })),
    (r) => r.body.state === 'done' || r.body.state === 'failed',
    { timeoutMs, intervalMs: 300 },
  );
  return value.body;
}

describe('compensated programs', () => {
  let engineer: Client, service: Client, technician: Client;
  let serial: string, noSet: string, setId: string;
  const qs = Array.from({ length: 12 }, (_, k) => [10 + k, -30 + k, 40, 20 + 2 * k, 50 - k, 30]);

  beforeAll(async () => {
    const m = await makeModel(db, nominal);
    const u = await makeUnit(db, m.revisionId), v = await makeUnit(db, m.revisionId);
    setId = (await approveSet(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: calibrated })).setId;
    serial = u.serial;
    noSet = v.serial;
    [engineer, service, technician] = await Promise.all([signedIn(DEMO.engineer), signedIn(DEMO.service), signedIn(DEMO.technician)]);
  });

  it('compensates an uploaded program in a job; the download is the calibrated joints and the nominal targets at them', async () => {
    const rows = qs.map((q, k) => {
      const p = onCalibrated.pose(q);
      const a = anglesFromRotation(p.rotation);
      return [k === 0 ? '=HOLE(1)' : `H${k + 1}`, ...p.position, a.rx, a.ry, a.rz, ...q.map((v) => v + 1.5)].join(',');
    });
    const csv = ['target,x,y,z,rx,ry,rz,q1,q2,q3,q4,q5,q6', ...rows].join('\n') + '\n';
    const r = await upload(engineer, serial, csv);
    expect(r.status, JSON.stringify(r.body)).toBe(202);
    const c = await finished(engineer, r.body.id);
    expect(c.state).toBe('done');
    expect(c.parameterSetId).toBe(setId);
    expect(c.targetCount).toBe(12);
    expect(c.input.sha256).toBe(sha(csv));
    expect(c.summary.counts.reached).toBe(12);
    expect(c.summary.largest).toHaveLength(12);
    const sizes = c.summary.largest.map((t: { correctionMm: number }) => t.correctionMm);
    expect([...sizes].sort((x: number, y: number) => y - x)).toEqual(sizes); // largest first
    expect(c.summary.histogram.counts.reduce((s: number, n: number) => s + n, 0)).toBe(12);

    const res = await service.fetch(`/api/compensations/${r.body.id}/file?part=output`);
    expect(res.status).toBe(200);
    const text = await res.text();
    expect(res.headers.get('x-content-sha256')).toBe(sha(text));
    expect(c.output.sha256).toBe(sha(text));
    // csv-parse (the csv project's reader) reads the file back.
    const out = parse(text, { columns: true }) as Record<string, string>[];
    expect(out).toHaveLength(12);
    expect(out[0].target).toBe("'=HOLE(1)");
    const onNominal = new IkSolver(nominal);
    out.forEach((row, k) => {
      const q = [1, 2, 3, 4, 5, 6].map((i) => Number(row[`q${i}`]));
      q.forEach((v, i) => expect(v).toBeCloseTo(qs[k][i], 6));
      const p = onNominal.pose(q).position;
      expect(Number(row.x)).toBeCloseTo(p[0], 9);
      expect(Number(row.z)).toBeCloseTo(p[2], 9);
    });
    // The original, byte for byte.
    const input = await engineer.fetch(`/api/compensations/${r.body.id}/file?part=input`);
    expect(await input.text()).toBe(csv);
    // The download is in the export log; the unit lists the compensation.
    const log = await service.json('/api/exports?page=1&pageSize=50');
    expect(log.body.entries.some((e: { kind: string; items: { serial: string }[] }) => e.kind === 'compensation' && e.items[0].serial === serial)).toBe(true);
    const list = await engineer.json(`/api/units/${encodeURIComponent(serial)}/compensations`);
    expect(list.body.compensations.map((x: { id: string }) => x.id)).toContain(r.body.id);
  });

  it('refuses a bad program with line and field, storing nothing', async () => {
    const before = await db.select({ id: compensations.id }).from(compensations);
    const r = await upload(engineer, serial, 'target,x,y,z\nA,1,2,3\nB,1,2,3,4\nC,1,x,3\n', 'bad.csv');
    expect(r.status).toBe(400);
    expect(r.body.errors).toEqual([
      expect.objectContaining({ line: 3, message: expect.stringMatching(/5 fields, the header has 4/) }),
      expect.objectContaining({ line: 4, column: 'y', field: 'y', message: '"x" is not a number', expected: 'mm' }),
    ]);
    const bad = await upload(engineer, serial, 'target,q1,q2,q3,q4,q5,q6\nA,1,2,3,4,5,6\n', 'j.csv', { frame: 'world', tool: '1,2' });
    expect(bad.status).toBe(400);
    expect(bad.body.errors.map((e: { field: string }) => e.field).sort()).toEqual(['frame', 'tool']);
    const after = await db.select({ id: compensations.id }).from(compensations);
    expect(after.length).toBe(before.length);
  });

  it('needs a current parameter set, and an engineer or service manager', async () => {
    const r = await upload(engineer, noSet, 'target,q1,q2,q3,q4,q5,q6\nA,1,2,3,4,5,6\n');
    expect(r.status).toBe(409);
    expect(r.body.error).toMatch(/no approved parameter set/);
    const t = await upload(technician, serial, 'target,q1,q2,q3,q4,q5,q6\nA,1,2,3,4,5,6\n');
    expect(t.status).toBe(403);
  });

  it('a 10 000-target joint program runs as a job and comes back complete', async () => {
    const lines = ['target,q1,q2,q3,q4,q5,q6'];
    for (let k = 0; k < 10_000; k++) {
      const t = k / 10_000;
      lines.push([`P${k + 1}`, 40 * Math.sin(2 * Math.PI * t), -30 + 20 * Math.sin(6 * Math.PI * t), 30 + 20 * Math.cos(4 * Math.PI * t), 30 * Math.sin(8 * Math.PI * t), 45 + 15 * Math.cos(5 * Math.PI * t), 60 * Math.sin(3 * Math.PI * t)].join(','));
    }
    const r = await upload(service, serial, lines.join('\n') + '\n', 'path-10k.csv', { frame: 'base' });
    expect(r.status).toBe(202);
    const first = await service.json(`/api/compensations/${r.body.id}`);
    expect(['queued', 'running', 'done']).toContain(first.body.state);
    const c = await finished(service, r.body.id, 120_000);
    expect(c.state).toBe('done');
    const total = Object.values(c.summary.counts as Record<string, number>).reduce((s, n) => s + n, 0);
    expect(total).toBe(10_000);
    expect(c.summary.largest.length).toBe(200);
    const [row] = await db.select().from(compensations).where(eq(compensations.id, r.body.id));
    expect(row.outputBytes).toBeGreaterThan(10_000 * 50);
    expect(row.createdBy).toBeTruthy();
  });
});
