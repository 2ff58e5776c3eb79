/**
 * Exports: one file per format, the batch zip (unzipped with jszip; every SHA-256 checked against the
 * manifests), refusals, and the export log.
 */
import { createHash } from 'node:crypto';
import JSZip from 'jszip';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseGeometry } from '../../src/lib/engine/geometry';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { createDb } from '../../src/lib/server/db';
import { chainPointMm, parseUrdf } from '../../src/lib/server/urdf-reader';
import { approveSet, makeModel, makeUnit, moved, testArm } from '../support/approved-sets';
import { DEMO, signedIn, type Client } from '../support/http';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
afterAll(() => db.$client.end());

const sha = (b: Uint8Array | string) => createHash('sha256').update(b).digest('hex');
const nominal = testArm();
// Values with many significant digits: the files must carry them unchanged.
const calibratedA = moved(nominal, { 'J1.a': 0.123456789012345, 'J2.theta': 0.0123456789, 'J2.beta': -0.00456789, 'J3.d': 0.0421, 'base.x': 1834.56789, 'base.rz': 91.25, 'tool.z': 0.0333 });

describe('exports', () => {
  let service: Client, quality: Client;
  let a: { serial: string; setId: string }, b: { serial: string; setId: string }, noSet: string;

  beforeAll(async () => {
    const m = await makeModel(db, nominal);
    const ua = await makeUnit(db, m.revisionId), ub = await makeUnit(db, m.revisionId), uc = await makeUnit(db, m.revisionId);
    await approveSet(db, { unitId: ua.unitId, revisionId: m.revisionId, geometry: moved(nominal, { 'J1.a': 1 }) });
    const a2 = await approveSet(db, { unitId: ua.unitId, revisionId: m.revisionId, geometry: calibratedA, standardErrors: { 'J1.a': 0.0021, 'J2.theta': 0.0004, 'J1.d': null } });
    const b1 = await approveSet(db, { unitId: ub.unitId, revisionId: m.revisionId, geometry: moved(nominal, { 'J2.a': -0.2 }), approverEmail: DEMO.engineer2 });
    a = { serial: ua.serial, setId: a2.setId };
    b = { serial: ub.serial, setId: b1.setId };
    noSet = uc.serial;
    [service, quality] = await Promise.all([signedIn(DEMO.service), signedIn(DEMO.quality)]);
  });

  it('geometry JSON: the approved geometry with full precision, checksum header, attachment name', async () => {
    const res = await service.fetch(`/api/parameter-sets/${a.setId}/export?format=json`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-disposition')).toBe(`attachment; filename="${a.serial}-v2-geometry.json"`);
    const text = await res.text();
    expect(res.headers.get('x-content-sha256')).toBe(sha(text));
    const g = parseGeometry(text, 'export.json');
    expect(g.joints[0]!.a).toBe(calibratedA.joints[0]!.a);
    expect(g.joints[1]!.beta).toBe(calibratedA.joints[1]!.beta);
    expect(g.base).toEqual(calibratedA.base);
  });

  it('CSV: one row per parameter, nominal / calibrated / change / standard error at full precision', async () => {
    const res = await service.fetch(`/api/parameter-sets/${a.setId}/export?format=csv`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toMatch(/^text\/csv/);
    const lines = (await res.text()).trimEnd().split('\r\n');
    expect(lines[0]).toBe('key,joint,group,unit,nominal,calibrated,change,standard_error');
    const row = (key: string) => lines.find((l) => l.startsWith(key + ','))!.split(',');
    const j1a = row('J1.a');
    expect(j1a.slice(0, 5)).toEqual(['J1.a', 'J1', 'lengths', 'mm', '300']);
    expect(Number(j1a[5])).toBe(calibratedA.joints[0]!.a);
    expect(j1a[5]).toBe(String(calibratedA.joints[0]!.a));
    expect(Number(j1a[6])).toBe(calibratedA.joints[0]!.a - 300);
    expect(j1a[7]).toBe('0.0021');
    expect(row('J1.d')[7]).toBe('');
    // A prismatic joint's d is its zero: group offsets, mm.
    expect(row('J3.d').slice(2, 4)).toEqual(['offsets', 'mm']);
    expect(row('J2.beta').slice(2, 4)).toEqual(['beta', 'deg']);
    // Groups in display order; no tool rotations.
    const groups = lines.slice(1).map((l) => l.split(',')[2]);
    expect(groups.filter((g, i) => groups.indexOf(g) === i)).toEqual(['lengths', 'twists', 'offsets', 'beta', 'base', 'tool']);
    expect(lines.some((l) => l.startsWith('tool.rx'))).toBe(false);
  });

  it('URDF: the file read back reproduces the calibrated forward kinematics within 1e-6 mm', async () => {
    const res = await service.fetch(`/api/parameter-sets/${a.setId}/export?format=urdf`);
    expect(res.status).toBe(200);
    const robot = parseUrdf(await res.text(), 'export.urdf');
    for (const q of [[0, 0, 0], [35, -80, 60], [-140, 130, 119.5]]) {
      const e = forwardPoint(calibratedA, q), u = chainPointMm(robot, 'tool', q);
      expect(Math.hypot(e[0] - u[0], e[1] - u[1], e[2] - u[2])).toBeLessThan(1e-6);
    }
  });

  it('refuses unknown formats, unknown sets and non-exporters', async () => {
    const bad = await service.json(`/api/parameter-sets/${a.setId}/export?format=pdf`);
    expect(bad.status).toBe(400);
    expect(bad.body.errors[0].field).toBe('format');
    expect((await service.json(`/api/parameter-sets/00000000-0000-4000-8000-000000000000/export?format=json`)).status).toBe(404);
    expect((await quality.json(`/api/parameter-sets/${a.setId}/export?format=json`)).status).toBe(403);
  });

  it('batch zip: a folder per unit, current sets only, every SHA-256 equal to the manifests', async () => {
    const res = await service.fetch('/api/exports', { method: 'POST', json: { serials: [a.serial, b.serial] } });
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('application/zip');
    const zip = await JSZip.loadAsync(new Uint8Array(await res.arrayBuffer()));
    const top = JSON.parse(await zip.file('manifest.json')!.async('string'));
    expect(top.format).toBe('offsetry-export-batch/1');
    expect(top.exportedBy.email).toBe(DEMO.service);
    expect(top.units.map((u: { serial: string; version: number }) => [u.serial, u.version])).toEqual([[a.serial, 2], [b.serial, 1]]);
    let checked = 0;
    for (const unit of top.units) {
      for (const f of unit.files) {
        const bytes = await zip.file(f.path)!.async('uint8array');
        expect(sha(bytes), f.path).toBe(f.sha256);
        expect(bytes.length).toBe(f.bytes);
        checked++;
      }
      const own = JSON.parse(await zip.file(`${unit.serial}/manifest.json`)!.async('string'));
      expect(own).toMatchObject({ serial: unit.serial, version: unit.version, parameterSetId: unit.parameterSetId });
      expect(own.approvedBy.email).toBe(unit.serial === b.serial ? DEMO.engineer2 : DEMO.engineer);
      expect(Date.parse(own.approvedAt)).not.toBeNaN();
      expect(own.armModel.revision).toBe(1);
      for (const f of own.files) expect(sha(await zip.file(`${unit.serial}/${f.name}`)!.async('uint8array'))).toBe(f.sha256);
      expect(own.files.map((f: { name: string }) => f.name)).toEqual(['geometry.json', 'parameters.csv', 'robot.urdf']);
    }
    expect(checked).toBe(8);
    // The zip holds exactly the listed files plus the top-level manifest.
    const listed = new Set(['manifest.json', ...top.units.flatMap((u: { files: { path: string }[] }) => u.files.map((f) => f.path))]);
    const inZip = Object.values(zip.files).filter((f) => !f.dir).map((f) => f.name);
    expect(new Set(inZip)).toEqual(listed);
  });

  it('batch refusals list every unknown serial and every unit without an approved set', async () => {
    const res = await service.json('/api/exports', { method: 'POST', json: { serials: [a.serial, 'NO-SUCH-UNIT-X', noSet] } });
    expect(res.status).toBe(400);
    expect(res.body.errors).toEqual([
      { field: 'serials.1', message: 'no unit with serial number NO-SUCH-UNIT-X' },
      { field: 'serials.2', message: `unit ${noSet} has no approved parameter set` },
    ]);
    expect((await service.json('/api/exports', { method: 'POST', json: { serials: [] } })).status).toBe(400);
    expect((await quality.json('/api/exports', { method: 'POST', json: { serials: [a.serial] } })).status).toBe(403);
  });

  it('logs every export with who, kind, format and items; quality reads the log', async () => {
    const log = await quality.json('/api/exports?pageSize=200');
    expect(log.status).toBe(200);
    const mine = log.body.entries.filter((e: { items: { serial: string }[] }) => e.items.some((i) => i.serial === a.serial));
    // json, csv, urdf singles and one batch; the refused requests wrote nothing.
    expect(mine.map((e: { kind: string; format: string }) => `${e.kind}:${e.format}`).sort()).toEqual(['batch:zip', 'single:csv', 'single:json', 'single:urdf']);
    const batch = mine.find((e: { kind: string }) => e.kind === 'batch');
    expect(batch.userEmail).toBe(DEMO.service);
    expect(batch.items).toEqual([
      { serial: a.serial, version: 2, parameterSetId: a.setId },
      { serial: b.serial, version: 1, parameterSetId: b.setId },
    ]);
    expect((await quality.json('/api/exports?page=0')).status).toBe(400);
  });
});
