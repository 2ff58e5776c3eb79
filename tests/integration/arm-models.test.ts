/**
 * Arm models through the HTTP API with signed-in clients and a bearer token: create / list / view, the
 * revision rule on edit, the geometry file export round trip, precise refusals, and roles.
 */
import { readFileSync } from 'node:fs';
import { beforeAll, describe, expect, it } from 'vitest';
import { parseGeometry, serializeGeometry } from '../../src/lib/engine/geometry';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { Client, DEMO, signedIn, uniq } from '../support/http';

const nominal = parseGeometry(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8'), 'orrin-r6-620-nominal.json');
const withName = (name: string, g: ArmGeometry = nominal): ArmGeometry => ({ ...structuredClone(g), name });

let engineer: Client;
let technician: Client;
let service: Client;
let bearer: Client;

beforeAll(async () => {
  [engineer, technician, service] = await Promise.all([signedIn(DEMO.engineer), signedIn(DEMO.technician), signedIn(DEMO.service)]);
  const token = await engineer.json<{ token: string }>('/api/tokens', { method: 'POST', json: { name: uniq('arm-models test ') } });
  expect(token.status).toBe(201);
  bearer = new Client(undefined, token.body.token);
});

async function createModel(client: Client, name = uniq('TEST-ARM-'), geometry: ArmGeometry = withName(name)) {
  const res = await client.json('/api/arm-models', { method: 'POST', json: { name, manufacturer: 'Invented Arms Co.', description: 'integration test', geometry } });
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return res.body as { id: string; name: string; revisions: { revision: number; geometry: ArmGeometry }[]; latest: { revision: number; geometry: ArmGeometry } };
}

describe('create, list, view', () => {
  it('creates revision r1 and shows it in the list and the model view', async () => {
    const name = uniq('TEST-ARM-');
    const created = await createModel(engineer, name);
    expect(created.name).toBe(name);
    expect(created.revisions.map((r) => r.revision)).toEqual([1]);
    expect(created.latest.revision).toBe(1);
    expect(created.latest.geometry.joints).toHaveLength(6);

    const list = await engineer.json<{ items: { id: string; name: string; latestRevision: number; jointCount: number; convention: string }[] }>('/api/arm-models');
    expect(list.status).toBe(200);
    const row = list.body.items.find((m) => m.id === created.id);
    expect(row).toMatchObject({ name, latestRevision: 1, jointCount: 6, convention: 'mdh' });

    const view = await technician.json(`/api/arm-models/${created.id}`);
    expect(view.status).toBe(200);
    expect(view.body.manufacturer).toBe('Invented Arms Co.');
    expect(view.body.revisions[0].geometry).toEqual(created.latest.geometry);
  });

  it('accepts the raw geometry file from a script with a bearer token, taking the name from the file', async () => {
    const name = uniq('TEST-RAW-');
    const text = serializeGeometry(withName(name));
    const res = await bearer.json('/api/arm-models', { method: 'POST', body: text, headers: { 'content-type': 'application/json' } });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    expect(res.body.name).toBe(name);
    expect(res.body.latest.geometry.convention).toBe('mdh');
  });

  it('refuses a second model with the same name (any case) with 409', async () => {
    const name = uniq('TEST-DUP-');
    await createModel(engineer, name);
    const again = await engineer.json('/api/arm-models', { method: 'POST', json: { name: name.toLowerCase(), geometry: withName(name) } });
    expect(again.status).toBe(409);
    expect(again.body.error).toContain('already exists');
    expect(again.body.errors[0].field).toBe('name');
  });
});

describe('bad geometry', () => {
  it('lists every problem with its field path', async () => {
    const g = structuredClone(withName(uniq('TEST-BAD-'))) as unknown as Record<string, any>;
    g.convention = 'sideways';
    g.joints[1].alpha = 'ninety';
    delete g.joints[2].type;
    g.joints[3].min = 10;
    g.joints[3].max = -10;
    g.joints[4].gamma = 1;
    const res = await engineer.json('/api/arm-models', { method: 'POST', json: { name: uniq('TEST-BAD-'), geometry: g } });
    expect(res.status).toBe(400);
    const fields = (res.body.errors as { field?: string; message: string }[]).map((e) => e.field);
    expect(fields).toEqual(expect.arrayContaining(['geometry.convention', 'geometry.joints[1].alpha', 'geometry.joints[2].type', 'geometry.joints[3].max', 'geometry.joints[4].gamma']));
    const alpha = res.body.errors.find((e: { field?: string }) => e.field === 'geometry.joints[1].alpha');
    expect(alpha.message).toContain('alpha (deg) must be a number');
  });

  it('names the line of a problem in a raw geometry file', async () => {
    const text = readFileSync('test-data/bad/geometry-missing-type.json', 'utf8');
    const res = await engineer.json('/api/arm-models', { method: 'POST', body: text, headers: { 'content-type': 'application/json' } });
    expect(res.status).toBe(400);
    const e = res.body.errors[0];
    expect(e.field).toMatch(/^joints\[\d+\]\.type$/);
    expect(typeof e.line).toBe('number');
    // A missing key is reported at the line that opens the joint's object.
    expect(text.split('\n')[e.line - 1]!.trim()).toBe('{');
  });

  it('locates a JSON syntax error by line', async () => {
    const res = await engineer.json('/api/arm-models', { method: 'POST', body: '{\n  "name": "x",\n  "geometry": {,}\n}', headers: { 'content-type': 'application/json' } });
    expect(res.status).toBe(400);
    expect(res.body.errors[0].line).toBe(3);
  });

  it('refuses a missing geometry and unknown top-level fields', async () => {
    const res = await engineer.json('/api/arm-models', { method: 'POST', json: { name: uniq('TEST-'), colour: 'teal' } });
    expect(res.status).toBe(400);
    expect(res.body.errors.map((e: { field?: string }) => e.field)).toEqual(expect.arrayContaining(['geometry', 'colour']));
  });
});

describe('editing and revisions', () => {
  it('updates the latest revision in place while nothing uses it, then makes r2 once a unit does', async () => {
    const created = await createModel(engineer);
    const g1 = created.latest.geometry;

    // Nothing refers to r1 yet: the change stays r1.
    const tweaked = structuredClone(g1);
    tweaked.joints[2]!.a = 470.25;
    const inPlace = await engineer.json(`/api/arm-models/${created.id}`, { method: 'PUT', json: { geometry: tweaked, description: 'a3 from drawing rev. B' } });
    expect(inPlace.status, JSON.stringify(inPlace.body)).toBe(200);
    expect(inPlace.body.newRevision).toBe(false);
    expect(inPlace.body.revisions).toHaveLength(1);
    expect(inPlace.body.latest.geometry.joints[2].a).toBe(470.25);
    expect(inPlace.body.description).toBe('a3 from drawing rev. B');

    // A technician registers a unit on r1.
    const serial = uniq('REV-');
    const reg = await technician.json('/api/units', { method: 'POST', json: { serial, modelId: created.id } });
    expect(reg.status, JSON.stringify(reg.body)).toBe(201);
    expect(reg.body.revision.revision).toBe(1);

    // Now the change becomes r2 and r1 stays as it was.
    const second = structuredClone(tweaked);
    second.joints[2]!.a = 471;
    const newRev = await engineer.json(`/api/arm-models/${created.id}`, { method: 'PUT', json: { geometry: second, note: 'a3 corrected' } });
    expect(newRev.status).toBe(200);
    expect(newRev.body.newRevision).toBe(true);
    expect(newRev.body.revision).toBe(2);
    expect(newRev.body.revisions.map((r: { revision: number }) => r.revision)).toEqual([1, 2]);
    expect(newRev.body.revisions[0].geometry.joints[2].a).toBe(470.25);
    expect(newRev.body.revisions[1].geometry.joints[2].a).toBe(471);
    expect(newRev.body.revisions[1].note).toBe('a3 corrected');

    // The unit keeps r1; earlier revisions stay downloadable.
    const unit = await technician.json(`/api/units/${serial}`);
    expect(unit.body.revision.revision).toBe(1);
    expect(unit.body.model.latestRevision).toBe(2);
    const r1 = await engineer.fetch(`/api/arm-models/${created.id}/geometry?revision=1`);
    expect(parseGeometry(await r1.text(), 'r1.json').joints[2]!.a).toBe(470.25);

    // A PUT that changes nothing in the geometry makes no revision.
    const same = await engineer.json(`/api/arm-models/${created.id}`, { method: 'PUT', json: { geometry: second } });
    expect(same.body.newRevision).toBe(false);
    expect(same.body.revisions).toHaveLength(2);
  });

  it('refuses bad changes with 400 and unknown models with 404', async () => {
    const created = await createModel(engineer);
    const unknown = await engineer.json(`/api/arm-models/${created.id}`, { method: 'PUT', json: { size: 'large' } });
    expect(unknown.status).toBe(400);
    expect(unknown.body.errors[0].field).toBe('size');
    const empty = await engineer.json(`/api/arm-models/${created.id}`, { method: 'PUT', json: {} });
    expect(empty.status).toBe(400);
    const badGeometry = await engineer.json(`/api/arm-models/${created.id}`, { method: 'PUT', json: { geometry: { ...created.latest.geometry, joints: [] } } });
    expect(badGeometry.status).toBe(400);
    expect(badGeometry.body.errors[0].field).toBe('geometry.joints');
    const missing = await engineer.json('/api/arm-models/00000000-0000-4000-8000-000000000000', { method: 'PUT', json: { description: 'x' } });
    expect(missing.status).toBe(404);
    expect((await engineer.json('/api/arm-models/not-a-uuid')).status).toBe(404);
  });
});

describe('geometry file export', () => {
  it('returns the file as an attachment with every number read back to the identical double', async () => {
    const name = uniq('TEST-PREC-');
    const g = withName(name);
    // Values whose shortest decimal text is long, or that are easy to round away.
    g.joints[0]!.d = 380.00000000000006;
    g.joints[1]!.a = 0.1 + 0.2;
    g.joints[1]!.theta = -90.00000000000001;
    g.joints[2]!.beta = 1e-17;
    g.joints[3]!.d = 455.12345678901234;
    g.joints[4]!.alpha = 89.99999999999999;
    g.tool = { x: 1 / 3, y: -2 / 7, z: 110.00000000000001, rx: 0, ry: 5e-324, rz: -0.000123456789 };
    const created = await createModel(engineer, name, g);

    const res = await engineer.fetch(`/api/arm-models/${created.id}/geometry`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toMatch(/^application\/json/);
    expect(res.headers.get('content-disposition')).toMatch(/^attachment; filename=".+-r1\.json"$/);
    const text = await res.text();
    expect(text).toBe(serializeGeometry(g));
    const back = parseGeometry(text, 'export.json');
    const numbers = (x: ArmGeometry) => [...x.joints.flatMap((j) => [j.a, j.alpha, j.d, j.theta, j.beta ?? NaN, j.min ?? NaN, j.max ?? NaN]), ...Object.values(x.tool!)];
    const a = numbers(g);
    const b = numbers(back);
    expect(b).toHaveLength(a.length);
    a.forEach((v, i) => expect(Object.is(v, b[i]) || (Number.isNaN(v) && Number.isNaN(b[i]))).toBe(true));

    // Importing the exported file again gives the same file once more.
    const re = await engineer.json('/api/arm-models', { method: 'POST', body: text.replace(name, `${name}-again`), headers: { 'content-type': 'application/json' } });
    expect(re.status).toBe(201);
    const again = await engineer.fetch(`/api/arm-models/${re.body.id}/geometry`);
    expect(await again.text()).toBe(text.replace(name, `${name}-again`));
  });

  it('refuses a revision that does not exist or is not a number', async () => {
    const created = await createModel(engineer);
    const missing = await engineer.json(`/api/arm-models/${created.id}/geometry?revision=9`);
    expect(missing.status).toBe(404);
    expect(missing.body.error).toContain('r9');
    const bad = await engineer.json(`/api/arm-models/${created.id}/geometry?revision=first`);
    expect(bad.status).toBe(400);
    expect(bad.body.errors[0].field).toBe('revision');
    const extra = await engineer.json(`/api/arm-models/${created.id}/geometry?rev=1`);
    expect(extra.status).toBe(400);
  });
});

describe('roles', () => {
  it('lets a technician read but not create or edit an arm model', async () => {
    const created = await createModel(engineer);
    const tryCreate = await technician.json('/api/arm-models', { method: 'POST', json: { name: uniq('TEST-T-'), geometry: nominal } });
    expect(tryCreate.status).toBe(403);
    const tryEdit = await technician.json(`/api/arm-models/${created.id}`, { method: 'PUT', json: { description: 'mine' } });
    expect(tryEdit.status).toBe(403);
    expect((await technician.json('/api/arm-models')).status).toBe(200);
    expect((await technician.fetch(`/api/arm-models/${created.id}/geometry`)).status).toBe(200);
  });

  it('keeps the geometry download from a service manager and anonymous callers', async () => {
    const created = await createModel(engineer);
    expect((await service.json(`/api/arm-models/${created.id}/geometry`)).status).toBe(403);
    expect((await new Client().json(`/api/arm-models/${created.id}`)).status).toBe(401);
  });

  it('writes an audit entry for create and for a new revision', async () => {
    // Read back through the database: the audit log has no API of its own outside a unit's history.
    const postgres = (await import('postgres')).default;
    const sql = postgres(process.env.DATABASE_URL!, { max: 1, onnotice: () => {} });
    try {
      const created = await createModel(engineer);
      await engineer.json(`/api/arm-models/${created.id}`, { method: 'PUT', json: { description: 'changed' } });
      const rows = await sql<{ action: string }[]>`select action from audit_log where entity_type = 'arm_model' and entity_id = ${created.id} order by at`;
      expect(rows.map((r) => r.action)).toEqual(['arm_model.created', 'arm_model.updated']);
    } finally {
      await sql.end();
    }
  });
});

describe('pages', () => {
  it('render the list, the view with joint table, sketch and revisions, and the forms', async () => {
    const created = await createModel(engineer);
    const list = await engineer.fetch('/arm-models');
    expect(list.status).toBe(200);
    expect(await list.text()).toContain(created.name);

    const view = await engineer.fetch(`/arm-models/${created.id}`);
    expect(view.status).toBe(200);
    const html = await view.text();
    expect(html).toContain('data-joint-table');
    expect(html).toContain('a (mm)');
    expect(html).toContain('alpha (deg)');
    // d of J1 in the Orrin R6-620 test geometry, with 3 decimals.
    expect(html).toContain('380.000');
    expect(html).toContain('data-arm-sketch');
    expect(html).toContain('Side view (x–z)');
    expect(html).toContain(`/api/arm-models/${created.id}/geometry?revision=1`);

    const edit = await engineer.fetch(`/arm-models/${created.id}/edit`);
    expect(edit.status).toBe(200);
    expect(await edit.text()).toContain('data-arm-model-form');
    expect((await engineer.fetch('/arm-models/new')).status).toBe(200);
  });

  it('show the forbidden page to a technician opening the model forms', async () => {
    const created = await createModel(engineer);
    const res = await technician.fetch('/arm-models/new');
    expect(res.status).toBe(403);
    expect(await res.text()).toContain('data-forbidden');
    expect((await technician.fetch(`/arm-models/${created.id}/edit`)).status).toBe(403);
    expect((await technician.fetch(`/arm-models/${created.id}`)).status).toBe(200);
  });
});
