/**
 * Browser hardening headers on pages and API answers, HSTS in production mode, and one role rule for
 * geometry reads (page, model API and file download agree).
 */
import { createHash, randomBytes } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels } from '../../src/db/schema';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { createDb } from '../../src/lib/server/db';
import { Client, DEMO, signedIn, uniq } from '../support/http';
import { requireEnv, startAppInstance, type AppInstance } from '../support/services';

const db = createDb(requireEnv('DATABASE_URL'), { max: 2 });
const geometry = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
const started: AppInstance[] = [];
let engineer: Client;
let service: Client;
let modelId: string;

beforeAll(async () => {
  [engineer, service] = await Promise.all([signedIn(DEMO.engineer), signedIn(DEMO.service)]);
  const [model] = await db.insert(armModels).values({ name: uniq('HDR-R6-'), description: 'header tests' }).returning();
  modelId = model!.id;
  await db.insert(armModelRevisions).values({ modelId, revision: 1, geometry });
});
afterAll(async () => {
  for (const a of started) await a.stop().catch(() => undefined);
  await db.$client.end();
});

const sha = (s: string) => `'sha256-${createHash('sha256').update(s, 'utf8').digest('base64')}'`;

describe('browser hardening headers', () => {
  it.each([['/signin'], ['/units'], ['/sessions/new'], [`/arm-models/MODEL`]])('page %s: CSP allowing only its own inline scripts, frame protection, nosniff, referrer policy', async (path) => {
    const res = await (path === '/signin' ? new Client() : engineer).fetch(path.replace('MODEL', modelId));
    expect(res.status).toBe(200);
    const html = await res.text();
    const csp = res.headers.get('content-security-policy') ?? '';
    const script = csp.split(';').map((d) => d.trim()).find((d) => d.startsWith('script-src')) ?? '';
    expect(script).toMatch(/^script-src 'self'/);
    expect(script).not.toMatch(/unsafe-inline|unsafe-eval|\*/);
    // Every inline script the page carries is allowed by its hash, and nothing else is.
    const inline = [...html.matchAll(/<script\b(?![^>]*\bsrc=)[^>]*>([\s\S]*?)<\/script>/gi)].map((m) => sha(m[1]!));
    for (const h of inline) expect(script).toContain(h);
    expect(script.split(' ').filter((t) => t.startsWith("'sha256-")).length).toBe(new Set(inline).size);
    expect(csp).toMatch(/frame-ancestors 'none'/);
    expect(csp).toMatch(/object-src 'none'/);
    expect(res.headers.get('x-frame-options')).toBe('DENY');
    expect(res.headers.get('x-content-type-options')).toBe('nosniff');
    expect(res.headers.get('referrer-policy')).toBe('same-origin');
    // Demo mode serves plain HTTP: no HSTS.
    expect(res.headers.get('strict-transport-security')).toBeNull();
  });

  it('API answers carry nosniff and a CSP under which nothing runs', async () => {
    const res = await engineer.fetch('/api/units');
    expect(res.headers.get('x-content-type-options')).toBe('nosniff');
    expect(res.headers.get('content-security-policy')).toMatch(/default-src 'none'/);
    const anon = await new Client().fetch('/api/me');
    expect(anon.status).toBe(401);
    expect(anon.headers.get('x-frame-options')).toBe('DENY');
  });

  it('production mode adds HSTS', async () => {
    const app = await startAppInstance({ OFFSETRY_MODE: 'production', AUTH_SECRET: randomBytes(32).toString('base64url'), RUN_WORKER: 'false' });
    started.push(app);
    const res = await fetch(new URL('/api/health', app.url));
    expect(res.headers.get('strict-transport-security')).toMatch(/max-age=\d{7,}/);
  }, 90_000);
});

describe('one role rule for geometry reads', () => {
  it('the service role is refused the geometry on the page, in the model API and as a file', async () => {
    expect((await service.fetch(`/arm-models/${modelId}`)).status).toBe(403);
    expect((await service.json(`/api/arm-models/${modelId}`)).status).toBe(403);
    expect((await service.json(`/api/arm-models/${modelId}/geometry`)).status).toBe(403);
    // An engineer reads all three.
    expect((await engineer.fetch(`/arm-models/${modelId}`)).status).toBe(200);
    expect((await engineer.json(`/api/arm-models/${modelId}`)).status).toBe(200);
    expect((await engineer.fetch(`/api/arm-models/${modelId}/geometry`)).status).toBe(200);
  });
});
