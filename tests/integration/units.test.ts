/**
 * Units through the HTTP API: registration (serial unique → 409), the unit record and history, the
 * server-side list (sort / filter / paginate, every query parameter checked, injection probes harmless),
 * the pose plan for the next visit, and roles (token calls included).
 */
import { readFileSync } from 'node:fs';
import { beforeAll, describe, expect, it } from 'vitest';
import { parseGeometry } from '../../src/lib/engine/geometry';
import { Client, DEMO, signedIn, uniq } from '../support/http';

const nominal = parseGeometry(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8'), 'orrin-r6-620-nominal.json');

let engineer: Client;
let technician: Client;
let quality: Client;
let service: Client;
let modelId: string;
let otherModelId: string;
const tag = uniq('T');

interface ListBody {
  items: { serial: string; site: string; cell: string; model: string; revision: number; commissionedOn: string | null }[];
  total: number;
  page: number;
  pageSize: number;
}

async function newModel(prefix: string) {
  const name = uniq(prefix);
  const res = await engineer.json('/api/arm-models', { method: 'POST', json: { name, geometry: { ...nominal, name } } });
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return res.body.id as string;
}

beforeAll(async () => {
  [engineer, technician, quality, service] = await Promise.all([signedIn(DEMO.engineer), signedIn(DEMO.technician), signedIn(DEMO.quality), signedIn(DEMO.service)]);
  modelId = await newModel('TEST-UNITS-');
  otherModelId = await newModel('TEST-UNITS-B-');
});

describe('registration', () => {
  it('registers a unit on the latest revision and returns the record with counts', async () => {
    const serial = uniq('R6-');
    const res = await technician.json('/api/units', {
      method: 'POST',
      json: { serial, modelId, site: 'Plant North', cell: 'Cell 4', commissionedOn: '2024-03-15', notes: 'welding line' },
    });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    expect(res.body).toMatchObject({ serial, site: 'Plant North', cell: 'Cell 4', commissionedOn: '2024-03-15', notes: 'welding line' });
    expect(res.body.revision.revision).toBe(1);
    expect(res.body.revision.geometry.joints).toHaveLength(6);
    expect(res.body.counts).toEqual({ sessions: 0, fits: 0, parameterSets: 0 });
    expect(res.body.currentParameterSet).toBeNull();

    const got = await service.json(`/api/units/${serial}`);
    expect(got.status).toBe(200);
    expect(got.body.model.id).toBe(modelId);
  });

  it('refuses a serial number that is already registered, in any letter case, with 409', async () => {
    const serial = uniq('DUP-');
    expect((await technician.json('/api/units', { method: 'POST', json: { serial, modelId } })).status).toBe(201);
    const again = await engineer.json('/api/units', { method: 'POST', json: { serial: serial.toLowerCase(), modelId } });
    expect(again.status).toBe(409);
    expect(again.body.error).toBe(`A unit with serial number ${serial} is already registered.`);
    expect(again.body.errors[0].field).toBe('serial');
  });

  it('names each bad field', async () => {
    const res = await technician.json('/api/units', {
      method: 'POST',
      json: { serial: 'has space/slash', modelId: 'nope', commissionedOn: '2024-02-30', revision: 1.5, colour: 'teal' },
    });
    expect(res.status).toBe(400);
    const fields = (res.body.errors as { field?: string }[]).map((e) => e.field);
    expect(fields).toEqual(expect.arrayContaining(['serial', 'modelId', 'commissionedOn', 'revision', 'colour']));
  });

  it('answers 404 for an unknown model and 400 for a revision the model does not have', async () => {
    const unknown = await technician.json('/api/units', { method: 'POST', json: { serial: uniq('X-'), modelId: '00000000-0000-4000-8000-000000000000' } });
    expect(unknown.status).toBe(404);
    const noRev = await technician.json('/api/units', { method: 'POST', json: { serial: uniq('X-'), modelId, revision: 7 } });
    expect(noRev.status).toBe(400);
    expect(noRev.body.errors[0].field).toBe('revision');
  });

  it('records the registration in the unit history', async () => {
    const serial = uniq('HIST-');
    await technician.json('/api/units', { method: 'POST', json: { serial, modelId } });
    const h = await quality.json(`/api/units/${serial}/history`);
    expect(h.status).toBe(200);
    expect(h.body.audit).toHaveLength(1);
    expect(h.body.audit[0]).toMatchObject({ action: 'unit.registered', entityType: 'unit', actorEmail: DEMO.technician });
    expect(h.body.sessions).toEqual([]);
    expect(h.body.fits).toEqual([]);
    expect(h.body.parameterSets).toEqual([]);
    expect((await quality.json(`/api/units/NOPE-${serial}/history`)).status).toBe(404);
  });

  it('lets a quality or service user read but not register', async () => {
    expect((await quality.json('/api/units', { method: 'POST', json: { serial: uniq('Q-'), modelId } })).status).toBe(403);
    expect((await service.json('/api/units', { method: 'POST', json: { serial: uniq('S-'), modelId } })).status).toBe(403);
    expect((await service.json('/api/units')).status).toBe(200);
  });
});

describe('list', () => {
  // Seven units with a tag only this file uses: sites and dates chosen so each sort has a known order.
  const rows = [
    { n: 1, site: `${tag} Site C`, cell: 'Cell 2', on: '2023-05-01', other: false },
    { n: 2, site: `${tag} Site A`, cell: 'Cell 9', on: '2021-01-10', other: false },
    { n: 3, site: `${tag} Site B`, cell: 'Cell 1', on: '2024-12-24', other: true },
    { n: 4, site: `${tag} Site A`, cell: 'Cell 3', on: '2022-07-07', other: false },
    { n: 5, site: `${tag} Site E`, cell: 'Cell 5', on: '2020-02-29', other: true },
    { n: 6, site: `${tag} Site D`, cell: 'Cell 8', on: '2025-06-30', other: false },
    { n: 7, site: `${tag} Site B`, cell: 'Cell 4', on: '2019-11-11', other: false },
  ];
  const serialOf = (n: number) => `${tag}-U${n}`;

  beforeAll(async () => {
    for (const r of rows) {
      const res = await technician.json('/api/units', {
        method: 'POST',
        json: { serial: serialOf(r.n), modelId: r.other ? otherModelId : modelId, site: r.site, cell: r.cell, commissionedOn: r.on },
      });
      expect(res.status, JSON.stringify(res.body)).toBe(201);
    }
  });

  const list = (c: Client, query: string) => c.json<ListBody>(`/api/units?${query}`);

  it('filters by text and pages through the result without overlap', async () => {
    const all = await list(engineer, `q=${encodeURIComponent(tag)}&pageSize=100`);
    expect(all.status).toBe(200);
    expect(all.body.total).toBe(7);
    expect(all.body.items.map((i) => i.serial)).toEqual(rows.map((r) => serialOf(r.n)));

    const pages = await Promise.all([1, 2, 3].map((p) => list(engineer, `q=${encodeURIComponent(tag)}&pageSize=3&page=${p}`)));
    expect(pages.map((p) => p.body.items.length)).toEqual([3, 3, 1]);
    expect(pages.every((p) => p.body.total === 7 && p.body.pageSize === 3)).toBe(true);
    expect(pages.flatMap((p) => p.body.items.map((i) => i.serial))).toEqual(rows.map((r) => serialOf(r.n)));
    const beyond = await list(engineer, `q=${encodeURIComponent(tag)}&pageSize=3&page=4`);
    expect(beyond.body.items).toEqual([]);
    expect(beyond.body.total).toBe(7);
  });

  it('sorts on the server by the requested column and direction', async () => {
    const q = `q=${encodeURIComponent(tag)}&pageSize=100`;
    const desc = await list(engineer, `${q}&sort=serial&dir=desc`);
    expect(desc.body.items.map((i) => i.serial)).toEqual(rows.map((r) => serialOf(r.n)).reverse());
    const byDate = await list(engineer, `${q}&sort=commissionedOn&dir=asc`);
    expect(byDate.body.items.map((i) => i.commissionedOn)).toEqual([...rows.map((r) => r.on)].sort());
    const bySite = await list(engineer, `${q}&sort=site`);
    // Ties (two at Site A, two at Site B) are broken by serial.
    expect(bySite.body.items.map((i) => i.serial)).toEqual([2, 4, 3, 7, 1, 6, 5].map(serialOf));
    const byCell = await list(engineer, `${q}&sort=cell&dir=desc`);
    expect(byCell.body.items.map((i) => i.cell)).toEqual(rows.map((r) => r.cell).sort().reverse());
  });

  it('filters by model id, by model name text and by site', async () => {
    const byModel = await list(engineer, `q=${encodeURIComponent(tag)}&model=${otherModelId}`);
    expect(byModel.body.items.map((i) => i.serial)).toEqual([3, 5].map(serialOf));
    const bySite = await list(engineer, `site=${encodeURIComponent(`${tag} site b`)}`);
    expect(bySite.body.items.map((i) => i.serial)).toEqual([3, 7].map(serialOf));
    const modelName = byModel.body.items[0]!.model;
    const byName = await list(engineer, `q=${encodeURIComponent(modelName)}`);
    expect(byName.body.items.map((i) => i.serial)).toEqual([3, 5].map(serialOf));
  });

  it('answers 400 naming the parameter for every nonsense query', async () => {
    const cases: [string, string][] = [
      ['page=0', 'page'],
      ['page=abc', 'page'],
      ['page=-1', 'page'],
      ['pageSize=1000', 'pageSize'],
      ['pageSize=2.5', 'pageSize'],
      ['sort=password_hash', 'sort'],
      ['sort=serial;drop%20table%20units', 'sort'],
      ['dir=sideways', 'dir'],
      ['model=1%20or%201=1', 'model'],
      ['limit=5', 'limit'],
      [`q=${'x'.repeat(101)}`, 'q'],
    ];
    for (const [query, field] of cases) {
      const res = await list(engineer, query);
      expect(res.status, query).toBe(400);
      expect((res.body as unknown as { errors: { field?: string }[] }).errors.map((e) => e.field), query).toContain(field);
    }
  });

  it('treats SQL and LIKE characters in the search text as plain text', async () => {
    for (const probe of [`' OR '1'='1`, `${tag}' --`, `%`, `_`, `\\`, `${tag}%U1`, `"; select pg_sleep(5); --`]) {
      const res = await list(engineer, `q=${encodeURIComponent(probe)}&model=${modelId}`);
      expect(res.status, probe).toBe(200);
      expect(res.body.total, probe).toBe(0);
    }
    // And the table is still there.
    expect((await list(engineer, `q=${encodeURIComponent(tag)}`)).body.total).toBe(7);
  });

  it('serves the list to a script with a bearer token, with the same roles', async () => {
    const tok = await technician.json<{ token: string }>('/api/tokens', { method: 'POST', json: { name: uniq('units test ') } });
    const bot = new Client(undefined, tok.body.token);
    const res = await bot.json<ListBody>(`/api/units?q=${encodeURIComponent(tag)}&pageSize=2`);
    expect(res.status).toBe(200);
    expect(res.body.items).toHaveLength(2);
    expect((await bot.json('/api/arm-models', { method: 'POST', json: { name: uniq('BOT-'), geometry: nominal } })).status).toBe(403);
    expect((await new Client(undefined, 'ofs_not-a-token').json('/api/units')).status).toBe(401);
  });
});

describe('pose plan', () => {
  let serial: string;
  beforeAll(async () => {
    serial = uniq('PLAN-');
    const res = await technician.json('/api/units', { method: 'POST', json: { serial, modelId } });
    expect(res.status).toBe(201);
  });

  it('downloads a CSV of poses within the joint limits, the same for the same seed', async () => {
    const res = await technician.fetch(`/api/units/${serial}/pose-plan?count=12&seed=3&format=csv`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toMatch(/^text\/csv/);
    expect(res.headers.get('content-disposition')).toBe(`attachment; filename="pose-plan-${serial}-n12-seed3.csv"`);
    const text = await res.text();
    const lines = text.trimEnd().split('\n');
    expect(lines[0]).toBe('pose,q1,q2,q3,q4,q5,q6');
    expect(lines).toHaveLength(13);
    for (const line of lines.slice(1)) {
      const [, ...q] = line.split(',');
      q.map(Number).forEach((v, k) => {
        expect(v).toBeGreaterThanOrEqual(nominal.joints[k]!.min!);
        expect(v).toBeLessThanOrEqual(nominal.joints[k]!.max!);
      });
    }
    const again = await technician.fetch(`/api/units/${serial}/pose-plan?count=12&seed=3&format=csv`);
    expect(await again.text()).toBe(text);
    const other = await technician.fetch(`/api/units/${serial}/pose-plan?count=12&seed=4&format=csv`);
    expect(await other.text()).not.toBe(text);
  });

  it('returns the quality figures as JSON, and POST gives the same plan as GET', async () => {
    const post = await engineer.json(`/api/units/${serial}/pose-plan`, { method: 'POST', json: { count: 10, seed: 2 } });
    expect(post.status, JSON.stringify(post.body)).toBe(200);
    expect(post.body.poses).toHaveLength(10);
    expect(post.body.source).toEqual({ kind: 'nominal', revision: 1 });
    const qual = post.body.quality;
    for (const k of ['O1', 'O3', 'O4', 'conditionNumber']) expect(Number.isFinite(qual[k]), k).toBe(true);
    expect(qual.identifiable).toBeGreaterThan(0);
    expect(qual.identifiable).toBeLessThanOrEqual(qual.parameterCount);
    expect(Array.isArray(qual.warnings)).toBe(true);
    const csv = await (await engineer.fetch(`/api/units/${serial}/pose-plan?count=10&seed=2&format=csv`)).text();
    expect(post.body.csv).toBe(csv);
    expect(csv.split('\n')[1]!.split(',').slice(1).map(Number)).toEqual(post.body.poses[0].q);
  });

  it('keeps the count within 6..500 and says so', async () => {
    for (const count of ['5', '501', 'many', '12.5']) {
      const res = await technician.json(`/api/units/${serial}/pose-plan?count=${count}`);
      expect(res.status, count).toBe(400);
      expect(res.body.errors[0].field).toBe('count');
      expect(res.body.errors[0].message).toMatch(/6.*500|500.*6/);
    }
    expect((await technician.json(`/api/units/${serial}/pose-plan?format=xlsx`)).status).toBe(400);
    expect((await technician.json(`/api/units/${serial}/pose-plan?count=10&colour=teal`)).status).toBe(400);
    expect((await technician.json(`/api/units/NOPE-${serial}/pose-plan`)).status).toBe(404);
  });

  it('is for technicians and engineers, not quality or service', async () => {
    expect((await quality.json(`/api/units/${serial}/pose-plan?count=6`)).status).toBe(403);
    expect((await service.json(`/api/units/${serial}/pose-plan?count=6`)).status).toBe(403);
  });
});

describe('pages', () => {
  it('render the unit list, the registration form and the unit page with its sections', async () => {
    const serial = uniq('PAGE-');
    await technician.json('/api/units', { method: 'POST', json: { serial, modelId, site: 'Plant South', notes: 'near the press' } });
    const list = await technician.fetch(`/units?q=${serial}`);
    expect(list.status).toBe(200);
    const listHtml = await list.text();
    expect(listHtml).toContain(`data-unit-row="${serial}"`);

    expect((await technician.fetch('/units/new')).status).toBe(200);
    expect((await quality.fetch('/units/new')).status).toBe(403);

    const page = await technician.fetch(`/units/${serial}`);
    expect(page.status).toBe(200);
    const html = await page.text();
    for (const text of [serial, 'Plant South', 'near the press', 'Sessions', 'Fits', 'Parameter sets', 'History', 'Pose plan for the next visit', `/sessions/new?unit=${serial}`]) {
      expect(html, text).toContain(text);
    }
    expect((await technician.fetch(`/units/NOPE-${serial}`)).status).toBe(404);
  });

  it('fall back to the first page with a note when the address has a bad query', async () => {
    const res = await technician.fetch('/units?sort=nonsense');
    expect(res.status).toBe(200);
    expect(await res.text()).toContain('parameters that were ignored');
  });
});
