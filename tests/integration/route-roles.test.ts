import { beforeAll, describe, expect, it } from 'vitest';
import { API_ROUTES, matchApiRoute, type Access } from '../../src/lib/shared/routes';
import { ROLES, type Role } from '../../src/lib/shared/roles';
import { apiRouteFiles, samplePath } from '../support/api-routes';
import { Client, DEMO, signedIn } from '../support/http';

// Every endpoint file under src/pages/api is checked automatically: a route added later without an entry in
// the access table fails here, and each of its methods is tried anonymously (401) and with every role the
// table does not allow (403).
const files = apiRouteFiles();
const demoFor: Record<Role, string> = {
  technician: DEMO.technician,
  engineer: DEMO.engineer,
  quality: DEMO.quality,
  service: DEMO.service,
  admin: DEMO.admin,
};
const clients = {} as Record<Role, Client>;

beforeAll(async () => {
  for (const role of ROLES) clients[role] = await signedIn(demoFor[role]);
});

describe('access table and endpoint files agree', () => {
  it('finds the endpoint files', () => {
    expect(files.length).toBeGreaterThan(5);
  });

  it.each(files.map((f) => [f.pattern, f]))('%s is in the access table with the methods it exports', (_p, f) => {
    const rule = API_ROUTES.find((r) => r.pattern === f.pattern);
    expect(rule, `${f.file} has no entry in src/lib/shared/routes.ts`).toBeDefined();
    expect(f.methods.length, `${f.file} exports no HTTP method`).toBeGreaterThan(0);
    expect(Object.keys(rule!.methods).sort()).toEqual([...f.methods].sort());
    // The matcher resolves the sample path to this very rule (static segments win over parameters).
    expect(matchApiRoute(samplePath(f.pattern))?.pattern).toBe(f.pattern);
  });

  it('has no table entry without an endpoint file', () => {
    const patterns = new Set(files.map((f) => f.pattern));
    expect(API_ROUTES.map((r) => r.pattern).filter((p) => !patterns.has(p))).toEqual([]);
  });
});

const cases = files.flatMap((f) => {
  const rule = API_ROUTES.find((r) => r.pattern === f.pattern);
  return f.methods.map((method) => ({ pattern: f.pattern, method, access: rule?.methods[method as 'GET'] as Access | undefined }));
});

describe('every API route by every role', () => {
  it.each(cases.map((c) => [`${c.method} ${c.pattern}`, c]))('%s', async (_n, c) => {
    const path = samplePath(c.pattern);
    const init = { method: c.method, json: c.method === 'GET' ? undefined : {} };
    if (c.access === 'public' || c.access === undefined) return;
    const anon = await new Client().json(path, init);
    expect(anon.status, `anonymous ${c.method} ${path}`).toBe(401);
    expect(typeof anon.body?.error).toBe('string');
    if (c.access === 'signed-in') return;
    for (const role of ROLES) {
      const allowed = (c.access as readonly Role[]).includes(role);
      const res = await clients[role].json(path, init);
      if (allowed) {
        expect(res.status, `${role} ${c.method} ${path}`).not.toBe(403);
        // An unknown id or an empty body is the caller's mistake: a 4xx answer, never a server error.
        expect(res.status, `${role} ${c.method} ${path}: ${JSON.stringify(res.body)}`).toBeLessThan(500);
      }
      else {
        expect(res.status, `${role} ${c.method} ${path}`).toBe(403);
        expect(res.body?.allowedRoles).toEqual(c.access);
      }
    }
  });
});

describe('API answers in JSON', () => {
  it('unknown API paths are 404 JSON, unlisted methods 405', async () => {
    const a = await clients.admin.json('/api/no-such-thing');
    expect(a.status).toBe(404);
    expect(a.body.error).toMatch(/No API route/);
    const b = await clients.admin.json('/api/me', { method: 'DELETE' });
    expect(b.status).toBe(405);
  });
});
