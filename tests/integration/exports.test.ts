/**
 * Exports: one file per format, the batch zip (unzipped with jszip; every SHA-256 checked against the
 * manifests), refusals, and the export log.
 */
import { execFileSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { eq } from 'drizzle-orm';
import JSZip from 'jszip';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { parseGeometry } from '../../src/lib/engine/geometry';
import { forwardPoint } from '../../src/lib/engine/kinematics';
import { armModels, units } from '../../src/db/schema';
import { createDb } from '../../src/lib/server/db';
import { chainPointMm, parseUrdf } from '../../src/lib/server/urdf-reader';
import { approveSet, makeModel, makeUnit, moved, testArm } from '../support/approved-sets';
import { DEMO, signedIn, uniq, type Client } from '../support/http';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
afterAll(() => db.$client.end());

const sha = (b: Uint8Array | string) => createHash('sha256').update(b).digest('hex');
const nominal = testArm();
// Values with many significant digits: the files must carry them unchanged.
const calibratedA = moved(nominal, { 'J1.a': 0.123456789012345, 'J2.theta': 0.0123456789, 'J2.beta': -0.00456789, 'J3.d': 0.0421, 'base.x': 1834.56789, 'base.rz': 91.25, 'tool.z': 0.0333 });

describe('exports', () => {
  let service: Client, quality: Client;
  let a: { serial: string; setId: string }, b: { serial: string; setId: string }, noSet: string, modelId: string;

  beforeAll(async () => {
    const m = await makeModel(db, nominal);
    modelId = m.modelId;
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
    // The metadata block names what the file is; Offsetry's own reader accepts and ignores it.
    const meta = JSON.parse(text).metadata;
    expect(meta).toMatchObject({ serial: a.serial, parameterSet: { id: a.setId, version: 2 }, armModel: { revision: 1 }, units: { length: 'mm', angle: 'deg' }, signConvention: 'change = calibrated − nominal' });
    expect(meta.certificate).toMatch(/^OC-\d{4}-\d{6}$/);
    const g = parseGeometry(text, 'export.json');
    expect(g).not.toHaveProperty('metadata');
    expect(g.joints[0]!.a).toBe(calibratedA.joints[0]!.a);
    expect(g.joints[1]!.beta).toBe(calibratedA.joints[1]!.beta);
    expect(g.base).toEqual(calibratedA.base);
  });

  it('CSV: one row per parameter, nominal / calibrated / change / standard error at full precision', async () => {
    const res = await service.fetch(`/api/parameter-sets/${a.setId}/export?format=csv`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toMatch(/^text\/csv/);
    const lines = (await res.text()).trimEnd().split('\r\n');
    expect(lines[0]).toBe('key,joint,group,unit,nominal,calibrated,change_calibrated_minus_nominal,standard_error');
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

  it('URDF: rooted at the robot base by default, the tracker frame on request; both reproduce the calibrated forward kinematics', async () => {
    const res = await service.fetch(`/api/parameter-sets/${a.setId}/export?format=urdf`);
    expect(res.status).toBe(200);
    const robot = parseUrdf(await res.text(), 'export.urdf');
    expect(robot.root).toBe('base');
    const tracker = await service.fetch(`/api/parameter-sets/${a.setId}/export?format=urdf&frame=tracker`);
    expect(tracker.headers.get('content-disposition')).toContain('robot-tracker-frame.urdf');
    const inTracker = parseUrdf(await tracker.text(), 'tracker.urdf');
    expect(inTracker.root).toBe('measurement');
    for (const q of [[0, 0, 0], [35, -80, 60], [-140, 130, 119.5]]) {
      const e = forwardPoint({ ...calibratedA, base: undefined }, q), u = chainPointMm(robot, 'tool', q);
      expect(Math.hypot(e[0] - u[0], e[1] - u[1], e[2] - u[2])).toBeLessThan(1e-6);
      const et = forwardPoint(calibratedA, q), ut = chainPointMm(inTracker, 'tool', q);
      expect(Math.hypot(et[0] - ut[0], et[1] - ut[1], et[2] - ut[2])).toBeLessThan(1e-6);
    }
    expect((await service.json(`/api/parameter-sets/${a.setId}/export?format=urdf&frame=flange`)).status).toBe(400);
  });

  it('an approved set\'s files keep their bytes when the model is renamed later', async () => {
    const before = await Promise.all(['json', 'csv', 'urdf'].map(async (f) => new Uint8Array(await (await service.fetch(`/api/parameter-sets/${a.setId}/export?format=${f}`)).arrayBuffer())));
    const [model] = await db.select({ name: armModels.name }).from(armModels).where(eq(armModels.id, modelId));
    await db.update(armModels).set({ name: `${model!.name} -- renamed` }).where(eq(armModels.id, modelId));
    try {
      const after = await Promise.all(['json', 'csv', 'urdf'].map(async (f) => new Uint8Array(await (await service.fetch(`/api/parameter-sets/${a.setId}/export?format=${f}`)).arrayBuffer())));
      after.forEach((bytes, i) => expect(sha(bytes)).toBe(sha(before[i]!)));
      expect(new TextDecoder().decode(after[2])).toContain(model!.name);
      expect(new TextDecoder().decode(after[2])).not.toContain('renamed');
    } finally {
      await db.update(armModels).set({ name: model!.name }).where(eq(armModels.id, modelId));
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
    const zipBytes = new Uint8Array(await res.arrayBuffer());
    const zip = await JSZip.loadAsync(zipBytes);
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
      expect(own.files.map((f: { name: string }) => f.name)).toEqual(['geometry.json', 'parameters.csv', 'robot.urdf', 'certificate.pdf']);
      // The certificate in the zip is the one the certificate route serves (reproducible bytes).
      const pdf = await zip.file(`${unit.serial}/certificate.pdf`)!.async('uint8array');
      expect(new TextDecoder().decode(pdf.subarray(0, 5))).toBe('%PDF-');
      const served = new Uint8Array(await (await service.fetch(`/api/parameter-sets/${unit.parameterSetId}/certificate`)).arrayBuffer());
      expect(sha(served)).toBe(sha(pdf));
    }
    expect(checked).toBe(10);
    // The zip holds exactly the listed files plus the top-level manifest and SHA256SUMS.
    const listed = new Set(['manifest.json', 'SHA256SUMS', ...top.units.flatMap((u: { files: { path: string }[] }) => u.files.map((f) => f.path))]);
    const inZip = Object.values(zip.files).filter((f) => !f.dir).map((f) => f.name);
    expect(new Set(inZip)).toEqual(listed);

    // Outside tools: Info-ZIP's unzip extracts it, GNU coreutils' sha256sum -c verifies every line of SHA256SUMS.
    const dir = mkdtempSync(path.join(tmpdir(), 'offsetry-zip-'));
    try {
      writeFileSync(path.join(dir, 'batch.zip'), zipBytes);
      execFileSync('unzip', ['-q', 'batch.zip', '-d', 'out'], { cwd: dir });
      const ok = execFileSync('sha256sum', ['-c', 'SHA256SUMS'], { cwd: path.join(dir, 'out') }).toString();
      const lines = ok.trim().split('\n');
      expect(lines.every((l) => l.endsWith(': OK'))).toBe(true);
      expect(lines).toHaveLength(inZip.length - 1);
      // The check can fail: one changed byte is reported.
      writeFileSync(path.join(dir, 'out', a.serial, 'parameters.csv'), 'changed');
      let failed = '';
      try {
        execFileSync('sha256sum', ['-c', '--quiet', 'SHA256SUMS'], { cwd: path.join(dir, 'out'), stdio: 'pipe' });
      } catch (e) {
        failed = String((e as { stdout?: Buffer }).stdout ?? '');
      }
      expect(failed).toContain(`${a.serial}/parameters.csv: FAILED`);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
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

  it('the picker pages units with an approved set from the server, searches serial and site there, and lists every serial a search matches', async () => {
    const m = await makeModel(db, nominal);
    const tag = uniq('PK');
    const site = `Picker hall ${tag}`;
    const made = [];
    for (let i = 1; i <= 5; i++) {
      const [u] = await db.insert(units).values({ serial: `${tag}-0${i}`, modelRevisionId: m.revisionId, site }).returning({ id: units.id, serial: units.serial });
      // The fifth has no approved set and is not offered.
      if (i < 5) await approveSet(db, { unitId: u!.id, revisionId: m.revisionId, geometry: moved(nominal, { 'J1.a': i / 10 }) });
      made.push(u!.serial);
    }
    const first = await service.json(`/api/exports/units?q=${tag}&pageSize=3`);
    expect(first.status).toBe(200);
    expect(first.body).toMatchObject({ q: tag, page: 1, pageSize: 3, total: 4, totalIsLowerBound: false });
    expect(first.body.items.map((u: { serial: string }) => u.serial)).toEqual(made.slice(0, 3));
    expect(first.body.items[0]).toMatchObject({ site, version: 1, needsAttention: false });
    const second = await service.json(`/api/exports/units?q=${tag}&pageSize=3&page=2`);
    expect(second.body.items.map((u: { serial: string }) => u.serial)).toEqual([made[3]]);
    // The site matches as well as the serial; a search with LIKE's wildcards finds them literally.
    expect((await service.json(`/api/exports/units?q=${encodeURIComponent(site)}`)).body.total).toBe(4);
    expect((await service.json(`/api/exports/units?q=${encodeURIComponent(tag + '%')}`)).body.total).toBe(0);
    const all = await service.json(`/api/exports/units/serials?q=${tag}`);
    expect(all.status).toBe(200);
    expect(all.body).toEqual({ q: tag, limit: 10_000, more: false, serials: made.slice(0, 4) });
    const bad = await service.json('/api/exports/units?pageSize=500');
    expect(bad.status).toBe(400);
    expect(bad.body.errors.map((e: { field: string }) => e.field)).toEqual(['pageSize']);
    expect((await quality.json(`/api/exports/units?q=${tag}`)).status).toBe(403);
    expect((await quality.json(`/api/exports/units/serials?q=${tag}`)).status).toBe(403);
  });

  it('logs every export with who, kind, format and items; quality reads the log', async () => {
    const log = await quality.json('/api/exports?pageSize=200');
    expect(log.status).toBe(200);
    const mine = log.body.entries.filter((e: { items: { serial: string }[] }) => e.items.some((i) => i.serial === a.serial));
    // json, csv, urdf singles (three of each for the rename check, one more URDF in the tracker frame), the
    // certificate fetched beside the batch, and one batch; the refused requests wrote nothing.
    const count = (k: string) => mine.filter((e: { kind: string; format: string }) => `${e.kind}:${e.format}` === k).length;
    expect([count('batch:zip'), count('single:json'), count('single:csv'), count('single:urdf'), count('single:certificate')]).toEqual([1, 3, 3, 4, 1]);
    expect(mine).toHaveLength(12);
    const batch = mine.find((e: { kind: string }) => e.kind === 'batch');
    expect(batch.userEmail).toBe(DEMO.service);
    expect(batch.items).toEqual([
      { serial: a.serial, version: 2, parameterSetId: a.setId },
      { serial: b.serial, version: 1, parameterSetId: b.setId },
    ]);
    expect((await quality.json('/api/exports?page=0')).status).toBe(400);
  });
});
