/**
 * The served OpenAPI document against the running app: it validates with an outside validator
 * (@apidevtools/swagger-parser), lists exactly the access table's routes, and for every GET route a real
 * reply (with real ids: a model, a unit with an uploaded session, an approved set, a drift alert, a compensated
 * program, a webhook endpoint, an invitation) validates against the document's response schema with ajv (JSON Schema 2020-12,
 * the dialect of OpenAPI 3.1).
 */
import SwaggerParser from '@apidevtools/swagger-parser';
import { Ajv2020 } from 'ajv/dist/2020.js';
import addFormats from 'ajv-formats';
import { randomBytes } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, driftAlerts, invitations, units, users } from '../../src/db/schema';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { sha256 } from '../../src/lib/server/tokens';
import { API_ROUTES } from '../../src/lib/shared/routes';
import { approveSet, moved } from '../support/approved-sets';
import { DEMO, signedIn, uniq, type Client } from '../support/http';
import { testDb } from './fit-fixtures';
import { poll } from '../support/wait';

const METHODS = ['get', 'post', 'put', 'patch', 'delete'] as const;
const geometry = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
const sessionFile = readFileSync('test-data/orrin-r6-620-session.csv');

let admin: Client;
let doc: any;
const ids: Record<string, string> = {};

beforeAll(async () => {
  admin = await signedIn(DEMO.admin);
  const db = testDb();
  const [model] = await db.insert(armModels).values({ name: uniq('OpenAPI R6 '), manufacturer: 'Invented Arms Ltd.' }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry }).returning();
  const serial = uniq('OA-');
  const [unit] = await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Test hall', cell: 'C2' }).returning();
  ids.model = model!.id;
  ids.serial = serial;

  // A session through the API, so its file is in S3 and its poses in the database.
  const form = new FormData();
  form.append('unit', serial);
  form.append('measuredOn', '2026-05-04');
  form.append('file', new Blob([sessionFile], { type: 'text/csv' }), 'orrin-r6-620-session.csv');
  const up = await admin.json('/api/sessions', { method: 'POST', body: form });
  expect(up.status, JSON.stringify(up.body)).toBe(201);
  ids.session = up.body.id;

  // Two approved versions, the second beyond tolerance, with the alert an approval would raise.
  const v1 = await approveSet(db, { unitId: unit!.id, revisionId: rev!.id, geometry });
  const v2 = await approveSet(db, { unitId: unit!.id, revisionId: rev!.id, geometry: moved(geometry, { 'J2.a': 1.5 }) });
  await db.insert(driftAlerts).values({ unitId: unit!.id, parameterSetId: v2.setId, previousSetId: v1.setId, details: [{ key: 'J2.a', change: 1.5, tolerance: 0.2, unit: 'mm' }] });
  ids.fit = v2.fitId;
  ids.set = v2.setId;

  // A small joint program compensated for the current set, through the API, waited for until its job is done
  // (so the detail carries its summary and the file route has an output to send).
  const program = ['target,q1,q2,q3,q4,q5,q6', 'P1,10,-30,40,20,50,30', 'P2,15,-25,35,25,45,35', 'P3,-20,-40,50,10,60,-30'].join('\n') + '\n';
  const programForm = new FormData();
  programForm.append('file', new Blob([program], { type: 'text/csv' }), 'openapi-joints.csv');
  const comp = await admin.json(`/api/units/${encodeURIComponent(serial)}/compensations`, { method: 'POST', body: programForm });
  expect(comp.status, JSON.stringify(comp.body)).toBe(202);
  ids.compensation = comp.body.id;
  const { value: state } = await poll(
    // A reused keep-alive socket closed by the server at the same moment resets the request (undici); ask again.
    async () => (await admin.json(`/api/compensations/${ids.compensation}`).catch(() => ({ body: { state: 'unknown' } }))).body.state as string,
    (s) => s === 'done' || s === 'failed',
    { timeoutMs: 60_000, intervalMs: 300 },
  );
  expect(state, 'the compensation job finished').toBe('done');

  // An invitation with a known link token (the mail only carries it to the person).
  const [person] = await db.insert(users).values({ email: `${uniq('invitee-').toLowerCase()}@example.com`, name: 'Invited person', roles: ['technician'] }).returning();
  const token = randomBytes(24).toString('base64url');
  await db.insert(invitations).values({ userId: person!.id, tokenHash: sha256(token), expiresAt: new Date(Date.now() + 86_400_000) });
  ids.token = token;

  // A webhook endpoint (on loopback; nothing is listening and no event is subscribed that this file causes)
  // and a personal token, so those lists are not empty.
  const hook = await admin.json('/api/admin/webhooks', { method: 'POST', json: { url: 'http://127.0.0.1:9/openapi-test', events: ['fit.finished'], description: 'openapi test' } });
  expect(hook.status, JSON.stringify(hook.body)).toBe(201);
  ids.webhook = hook.body.endpoint.id;
  expect((await admin.json('/api/tokens', { method: 'POST', json: { name: uniq('openapi ') } })).status).toBe(201);

  const res = await admin.json('/api/openapi.json');
  expect(res.status).toBe(200);
  doc = res.body;
});

afterAll(async () => {
  if (ids.webhook) await admin.json(`/api/admin/webhooks/${ids.webhook}`, { method: 'DELETE' });
  await testDb().$client.end();
});

/** A concrete path and query for each GET route, with the ids made above. */
function concrete(pattern: string): string {
  const byParam: Record<string, string> = {
    '/api/arm-models/[id]': ids.model!,
    '/api/sessions/[id]': ids.session!,
    '/api/fits/[id]': ids.fit!,
    '/api/parameter-sets/[id]': ids.set!,
    '/api/admin/webhooks/[id]': ids.webhook!,
    '/api/compensations/[id]': ids.compensation!,
  };
  let path = pattern.replace('[serial]', encodeURIComponent(ids.serial!)).replace('[token]', ids.token!);
  for (const [prefix, id] of Object.entries(byParam)) if (pattern.startsWith(prefix)) path = path.replace('[id]', id);
  const query: Record<string, string> = {
    '/api/units/[serial]/compare': `a=nominal&b=${ids.set}&samples=200`,
    '/api/parameter-sets/[id]/export': 'format=json',
    '/api/compensations/[id]/file': 'part=output',
    '/api/fits': `unit=${encodeURIComponent(ids.serial!)}`,
    '/api/sessions': `unit=${encodeURIComponent(ids.serial!)}`,
  };
  return query[pattern] ? `${path}?${query[pattern]}` : path;
}

const toOpenApi = (pattern: string) => pattern.replace(/\[(?:\.\.\.)?([^\]]+)\]/g, '{$1}');

describe('GET /api/openapi.json', () => {
  it('validates as OpenAPI 3.1 with swagger-parser', async () => {
    await expect(SwaggerParser.validate(structuredClone(doc))).resolves.toMatchObject({ openapi: '3.1.0' });
  });

  it('lists every route of the access table with its methods, and nothing else', () => {
    const fromTable = API_ROUTES.flatMap((r) => Object.keys(r.methods).map((m) => `${m.toLowerCase()} ${toOpenApi(r.pattern)}`)).sort();
    const fromDoc = Object.entries(doc.paths).flatMap(([p, item]) => METHODS.filter((m) => (item as any)[m]).map((m) => `${m} ${p}`)).sort();
    expect(fromDoc).toEqual(fromTable);
  });

  it('request schemas carry the endpoints\' current fields (submit override, refit note, export frame, compensation form)', () => {
    const body = (p: string, m: string, type = 'application/json') => doc.paths[p][m].requestBody.content[type].schema;
    expect(Object.keys(body('/api/fits/{id}/submit', 'post').properties)).toEqual(expect.arrayContaining(['comment', 'override']));
    expect(Object.keys(body('/api/fits/{id}/refit', 'post').properties)).toContain('note');
    const exportQuery = doc.paths['/api/parameter-sets/{id}/export'].get.parameters.find((p: { name: string }) => p.name === 'frame');
    expect(exportQuery?.schema.enum).toEqual(expect.arrayContaining(['base', 'tracker']));
    const form = body('/api/units/{serial}/compensations', 'post', 'multipart/form-data');
    expect(form.required).toEqual(['file']);
    expect(form.properties.frame.enum).toEqual(['base', 'measurement']);
    expect(body('/api/arm-models/{id}/judgement', 'put').required).toEqual(expect.arrayContaining(['lengthBoundMm', 'angleBoundDeg', 'instrumentNoiseMm', 'toolFixture']));
  });

  it('is readable without signing in', async () => {
    const res = await fetch(new URL('/api/openapi.json', admin.base));
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toContain('application/json');
  });
});

describe('real replies of every GET route match the document', () => {
  const gets = API_ROUTES.filter((r) => r.methods.GET).map((r) => r.pattern);
  const ajv = new Ajv2020({ strict: false, allErrors: true });
  addFormats(ajv);
  let added = false;

  it.each(gets)('GET %s', async (pattern) => {
    if (!added) {
      // The whole document as one schema resource, so "#/components/schemas/…" references resolve.
      ajv.addSchema({ ...doc, $id: 'offsetry-openapi' });
      added = true;
    }
    const path = concrete(pattern);
    expect(path, 'every parameter has a value').not.toMatch(/\[/);
    const res = await admin.fetch(path);
    const text = await res.text();
    expect(res.status, `${path}: ${text.slice(0, 500)}`).toBe(200);
    const op = doc.paths[toOpenApi(pattern)].get;
    const content = op.responses['200'].content as Record<string, { schema: any }>;
    const type = (res.headers.get('content-type') ?? '').split(';')[0]!.trim();
    expect(Object.keys(content), `${path}: documented media types`).toContain(type);
    const schema = content[type]!.schema;
    if (schema.type === 'string') {
      expect(text.length, `${path}: a file`).toBeGreaterThan(0);
      return;
    }
    const pointer = ['paths', toOpenApi(pattern), 'get', 'responses', '200', 'content', type, 'schema'].map((s) => s.replace(/~/g, '~0').replace(/\//g, '~1')).join('/');
    const validate = ajv.getSchema(`offsetry-openapi#/${pointer}`)!;
    const body = JSON.parse(text);
    const ok = validate(body);
    expect(ok, `${path}: ${JSON.stringify(validate.errors?.slice(0, 5), null, 1)}`).toBe(true);
  });

  it('the reply schemas are not vacuous: a wrong field type is refused', () => {
    const validate = ajv.getSchema(`offsetry-openapi#/components/schemas/Unit`)!;
    expect(validate({ id: 'not-a-uuid', serial: 5 })).toBe(false);
    const compensation = ajv.getSchema(`offsetry-openapi#/components/schemas/Compensation`)!;
    expect(compensation({ id: ids.compensation, state: 'finished' })).toBe(false);
    const settings = ajv.getSchema(`offsetry-openapi#/components/schemas/JudgementSettings`)!;
    expect(settings({ lengthBoundMm: '5', angleBoundDeg: 1, instrumentNoiseMm: 0.05, toolFixture: false })).toBe(false);
    expect(settings({ lengthBoundMm: 5, angleBoundDeg: 1, instrumentNoiseMm: 0.05, toolFixture: false })).toBe(true);
    const problem = ajv.getSchema(`offsetry-openapi#/components/schemas/Problem`)!;
    expect(problem({ error: 'x', errors: [{ line: 3, column: 'q2', message: 'not a number' }] })).toBe(true);
    expect(problem({ errors: [] })).toBe(false);
  });

  it('refusals answer the documented problem format', async () => {
    const problem = ajv.getSchema(`offsetry-openapi#/components/schemas/Problem`)!;
    const res = await admin.json('/api/units?page=zero');
    expect(res.status).toBe(400);
    expect(problem(res.body), JSON.stringify(problem.errors)).toBe(true);
    expect(res.body.errors[0].field).toBe('page');
    const anonymous = await fetch(new URL('/api/units', admin.base));
    expect(anonymous.status).toBe(401);
    expect(problem(await anonymous.json())).toBe(true);
  });
});
