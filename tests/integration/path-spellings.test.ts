/**
 * One path, one rule: the access rule is chosen from the route the router serves, so no other spelling of a
 * path (extra slashes, dot segments, percent-encodings, case, trailing characters) gets more than the
 * canonical path. Requests go out raw through node:http so the spelling reaches the server exactly as written
 * (fetch and URL would normalise it first).
 *
 * For every route in the access table, every method and every role (and anonymous) whose canonical request is
 * refused, every spelling must be refused as well: 401/403/405, a 404 that is the "no route" answer (never an
 * endpoint's own "not found", which would mean the endpoint ran), the sign-in redirect or the forbidden page.
 */
import http from 'node:http';
import { beforeAll, describe, expect, it } from 'vitest';
import { API_ROUTES, PAGE_RULES, allows, pageAccess, type Access, type Method } from '../../src/lib/shared/routes';
import { ROLES, type Role } from '../../src/lib/shared/roles';
import { samplePath } from '../support/api-routes';
import { BASE_URL, DEMO, signedIn } from '../support/http';

const METHODS: Method[] = ['GET', 'POST', 'PUT', 'PATCH', 'DELETE'];
const base = new URL(BASE_URL);
const demoFor: Record<Role, string> = {
  technician: DEMO.technician,
  engineer: DEMO.engineer,
  quality: DEMO.quality,
  service: DEMO.service,
  admin: DEMO.admin,
};
const tokens = {} as Record<Role, string>;

interface Raw {
  status: number;
  route: string;
  location: string;
  type: string;
  body: string;
}

function raw(path: string, method: string, who: Role | 'anonymous'): Promise<Raw> {
  return new Promise((resolve, reject) => {
    const headers: Record<string, string> = { origin: base.origin };
    if (who !== 'anonymous') headers.authorization = `Bearer ${tokens[who]}`;
    const body = method === 'GET' || method === 'DELETE' ? undefined : '{}';
    if (body) headers['content-type'] = 'application/json';
    const req = http.request({ host: base.hostname, port: base.port, path, method, headers }, (res) => {
      const chunks: Buffer[] = [];
      res.on('data', (c: Buffer) => chunks.push(c));
      res.on('end', () =>
        resolve({
          status: res.statusCode ?? 0,
          route: String(res.headers['x-offsetry-route'] ?? ''),
          location: String(res.headers.location ?? ''),
          type: String(res.headers['content-type'] ?? ''),
          body: Buffer.concat(chunks).toString('utf8').slice(0, 400),
        }),
      );
    });
    req.on('error', reject);
    req.end(body);
  });
}

/** Ways to write the same path that a URL parser, Astro's router or a proxy may treat as equal. */
export function spellings(canonical: string): string[] {
  const segs = canonical.split('/').slice(1);
  const first = segs[0]!;
  const rest = segs.slice(1).join('/');
  const tail = rest ? '/' + rest : '';
  const encFirst = '%' + first.charCodeAt(0).toString(16) + first.slice(1);
  const encFirstUpper = '%' + first.charCodeAt(0).toString(16).toUpperCase() + first.slice(1);
  const out = [
    '/' + canonical,
    '//' + canonical,
    '/\\' + canonical.slice(1),
    '\\' + canonical.slice(1),
    '/.' + canonical,
    '/./' + canonical.slice(1),
    '/%2e' + canonical,
    '/%2E/' + canonical.slice(1),
    `/x/..${canonical}`,
    `/x/%2e%2e${canonical}`,
    `/${first}/../${first}${tail}`,
    `/${encFirst}${tail}`,
    `/${encFirstUpper}${tail}`,
    '/%2F' + canonical.slice(1),
    '//' + encFirst + tail,
    canonical.toUpperCase(),
    '/' + first[0]!.toUpperCase() + first.slice(1) + tail,
    canonical + '/',
    canonical + '//',
    canonical + '/.',
    canonical + '%2F',
    canonical + '%20',
    canonical + '%00',
    canonical + '.',
    canonical + ';',
    canonical + '?x=1',
    canonical + '#x',
    canonical.replace(/\//g, '//'),
  ];
  if (segs.length > 1) out.push(`/${first}/./${segs.slice(1).join('/')}`, `/${first}/${encodeURIComponent(segs[1]!).replace(/^./, (c) => '%' + c.charCodeAt(0).toString(16))}${segs.length > 2 ? '/' + segs.slice(2).join('/') : ''}`);
  return [...new Set(out)].filter((s) => s !== canonical);
}

/**
 * A spelling that the router serves with a different route (e.g. "/api/sessions/uploads%20" is the session
 * with id "uploads ") is held to that route's own rule instead.
 */
function allowedElsewhere(r: Raw, canonicalRoute: string, method: Method, who: Role | 'anonymous'): boolean {
  if (!r.route || r.route === canonicalRoute) return false;
  const other = API_ROUTES.find((x) => x.pattern === r.route);
  if (other) return !canonicalRefuses(other.methods[method], who);
  if (r.route.startsWith('/api')) return false;
  const access = pageAccess(r.route);
  return access === 'public' || (who !== 'anonymous' && allows(access, [who]));
}

/** A refusal the guard (or the router's "no such route") gives, as opposed to anything an endpoint or page does. */
function refused(r: Raw): boolean {
  if ([401, 403, 405].includes(r.status)) return true;
  // Node's or the adapter's refusal of a malformed request line or an undecodable path (never an endpoint's JSON).
  if (r.status === 400 && !r.type.includes('json')) return true;
  if (r.status === 404) return !r.type.includes('json') || /^\{"error":"No API route/.test(r.body);
  if (r.status === 303) return new URL(r.location, base).pathname === '/signin';
  // Astro's trailing-slash canonicalisation: the target is another spelling, checked on its own.
  if (r.status === 301 || r.status === 308) return true;
  return false;
}

async function pool<T>(items: T[], n: number, fn: (t: T) => Promise<void>) {
  let i = 0;
  await Promise.all(Array.from({ length: n }, async () => {
    while (i < items.length) await fn(items[i++]!);
  }));
}

beforeAll(async () => {
  for (const role of ROLES) {
    const c = await signedIn(demoFor[role]);
    const t = await c.json('/api/tokens', { method: 'POST', json: { name: `spellings ${role}` } });
    expect(t.status).toBe(201);
    tokens[role] = t.body.token;
  }
});

const WHO: (Role | 'anonymous')[] = ['anonymous', ...ROLES];
const canonicalRefuses = (access: Access | undefined, who: Role | 'anonymous') =>
  access === undefined || (access !== 'public' && (who === 'anonymous' || !allows(access, [who])));

describe('no spelling of an API route gets more than the canonical path', () => {
  it.each(API_ROUTES.map((r) => [r.pattern, r]))('%s', async (_p, rule) => {
    const canonical = samplePath(rule.pattern);
    const cases: { method: Method; who: Role | 'anonymous' }[] = [];
    for (const method of METHODS) {
      for (const who of WHO) {
        if (!canonicalRefuses(rule.methods[method], who)) continue;
        // An unlisted method is refused for everyone: the most privileged caller stands for all.
        if (rule.methods[method] === undefined && who !== 'admin' && who !== 'anonymous') continue;
        cases.push({ method, who });
      }
    }
    const failures: string[] = [];
    // The canonical path itself is refused for these callers (the baseline the spellings are held to).
    await pool(cases, 6, async ({ method, who }) => {
      const c = await raw(canonical, method, who);
      if (!refused(c)) failures.push(`canonical ${method} ${canonical} as ${who}: ${c.status} ${c.body.slice(0, 100)}`);
      for (const s of spellings(canonical)) {
        const r = await raw(s, method, who);
        if (!refused(r) && !allowedElsewhere(r, rule.pattern, method, who)) failures.push(`${method} ${s} as ${who}: ${r.status} ${r.body.slice(0, 100)}`);
      }
    });
    expect(failures).toEqual([]);
  });
});

const PAGES = [
  '/account',
  '/admin/mail',
  '/admin/people',
  '/arm-models',
  '/arm-models/new',
  '/arm-models/00000000-0000-4000-8000-000000000000',
  '/exports',
  '/fits',
  '/fits/new',
  '/fleet',
  '/reviews',
  '/sessions',
  '/sessions/new',
  '/units',
  '/units/new',
  '/units/NO-SUCH-UNIT/compare',
  '/units/NO-SUCH-UNIT/drift',
  '/units/NO-SUCH-UNIT/compensate',
  '/compensations/00000000-0000-4000-8000-000000000000',
  '/admin/webhooks',
];

describe('no spelling of a page gets more than the canonical path', () => {
  it('covers every page rule prefix', () => {
    for (const r of PAGE_RULES) {
      if (r.roles === 'public') continue;
      const prefix = r.prefix.replace('[serial]', 'NO-SUCH-UNIT');
      expect(PAGES.some((p) => p === prefix || p.startsWith(prefix + '/')), r.prefix).toBe(true);
    }
  });

  it.each(PAGES.map((p) => [p]))('%s', async (page) => {
    const access = pageAccess(page);
    const failures: string[] = [];
    const who = WHO.filter((w) => w === 'anonymous' || !allows(access, [w]));
    await pool(who, 6, async (w) => {
      for (const s of spellings(page)) {
        const r = await raw(s, 'GET', w);
        if (!refused(r) && !allowedElsewhere(r, '', 'GET', w)) failures.push(`GET ${s} as ${w}: ${r.status} ${r.body.slice(0, 80)}`);
      }
    });
    expect(failures).toEqual([]);
  });
});
