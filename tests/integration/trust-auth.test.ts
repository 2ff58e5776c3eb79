/**
 * Sign-in and sessions, tried as an attacker would: where the browser is sent after sign-in, whether an ended
 * session (sign-out, "sign out everywhere", deactivation, a role change) ever works again from a copied
 * cookie, and whether sign-in time tells which accounts exist.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb } from '../../src/lib/server/db';
import { upsertUserWithPassword } from '../../src/lib/server/users';
import type { Role } from '../../src/lib/shared/roles';
import { Client, DEMO, signedIn, uniq } from '../support/http';
import { requireEnv, startAppInstance, type AppInstance } from '../support/services';

const db = createDb(requireEnv('DATABASE_URL'), { max: 2 });
const PASSWORD = 'trust-tests-password';
const started: AppInstance[] = [];
let admin: Client;

async function person(roles: Role[] = ['quality']) {
  const email = `${uniq('trust')}@example.com`.toLowerCase();
  const u = await upsertUserWithPassword({ email, name: 'Trust Test', roles, password: PASSWORD }, db);
  return { id: u.id, email };
}

/** A second client holding a copy of `c`'s cookies, as a stolen or copied cookie would be. */
function copyOf(c: Client): Client {
  const copy = new Client(c.base);
  (copy as unknown as { cookies: Map<string, string> }).cookies = new Map((c as unknown as { cookies: Map<string, string> }).cookies);
  return copy;
}

async function signOut(c: Client) {
  const csrf = await c.json<{ csrfToken: string }>('/api/auth/csrf');
  const res = await c.fetch('/api/auth/signout', {
    method: 'POST',
    headers: { 'content-type': 'application/x-www-form-urlencoded', 'x-auth-return-redirect': '1' },
    body: new URLSearchParams({ csrfToken: csrf.body.csrfToken, callbackUrl: '/signin' }),
  });
  expect(res.status).toBeLessThan(400);
}

beforeAll(async () => {
  admin = await signedIn(DEMO.admin);
});

afterAll(async () => {
  for (const a of started) await a.stop().catch(() => undefined);
  await db.$client.end();
});

describe('redirect after sign-in', () => {
  // Spellings that a browser resolves to another host although the text starts with "/".
  const foreign = ['/%5Cevil.example/x', '/%09/evil.example/x', '/%0A/evil.example', '//evil.example/x', '/\\evil.example', 'https://evil.example/', '/%2F/evil.example', ' //evil.example', 'javascript:alert(1)', '\\\\evil.example'];

  it.each(foreign.map((n) => [n]))('next=%s stays on this origin', async (next) => {
    const c = await signedIn(DEMO.quality);
    const res = await c.fetch(`/signin?next=${next}`);
    expect(res.status).toBe(303);
    const target = new URL(res.headers.get('location')!, c.base);
    expect(target.origin, res.headers.get('location')!).toBe(new URL(c.base).origin);
    expect(target.pathname).toBe('/');
  });

  it('keeps a same-origin path with its query', async () => {
    const c = await signedIn(DEMO.quality);
    const res = await c.fetch(`/signin?next=${encodeURIComponent('/units?site=Hall%20A')}`);
    expect(res.headers.get('location')).toBe('/units?site=Hall%20A');
  });

  it('the page hands only the parsed path to the form', async () => {
    const res = await new Client().fetch('/signin?next=/%5Cevil.example/x');
    const html = await res.text();
    expect(html).not.toMatch(/evil\.example/);
  });
});

describe('sessions end on the server', () => {
  it('sign-out ends the session: a copied cookie no longer works', async () => {
    const p = await person();
    const c = await signedIn(p.email, PASSWORD);
    const stolen = copyOf(c);
    expect((await stolen.json('/api/me')).status).toBe(200);
    await signOut(c);
    expect((await stolen.json('/api/me')).status).toBe(401);
  });

  it('"sign out everywhere" ends every browser session of the person', async () => {
    const p = await person();
    const a = await signedIn(p.email, PASSWORD);
    const b = await signedIn(p.email, PASSWORD);
    const other = await signedIn(DEMO.quality);
    // Without the explicit confirmation nothing ends.
    expect((await a.json('/api/me/sign-out-everywhere', { method: 'POST', json: {} })).status).toBe(400);
    expect((await b.json('/api/me')).status).toBe(200);
    const res = await a.json('/api/me/sign-out-everywhere', { method: 'POST', json: { confirm: true } });
    expect(res.status).toBe(200);
    expect(res.body.ended).toBeGreaterThanOrEqual(2);
    expect((await a.json('/api/me')).status).toBe(401);
    expect((await b.json('/api/me')).status).toBe(401);
    // Another person's session is untouched.
    expect((await other.json('/api/me')).status).toBe(200);
  });

  it('deactivation ends sessions for good: reactivation does not revive an old cookie', async () => {
    const p = await person();
    const c = await signedIn(p.email, PASSWORD);
    const stolen = copyOf(c);
    expect((await admin.json(`/api/admin/users/${p.id}`, { method: 'PATCH', json: { active: false } })).status).toBe(200);
    expect((await admin.json(`/api/admin/users/${p.id}`, { method: 'PATCH', json: { active: true } })).status).toBe(200);
    expect((await stolen.json('/api/me')).status).toBe(401);
    expect((await c.json('/api/me')).status).toBe(401);
    // Signing in again works and gives a fresh session.
    const again = await signedIn(p.email, PASSWORD);
    expect((await again.json('/api/me')).status).toBe(200);
  });

  it('a role change ends the sessions signed in under the old roles', async () => {
    const p = await person(['engineer']);
    const c = await signedIn(p.email, PASSWORD);
    expect((await admin.json(`/api/admin/users/${p.id}`, { method: 'PATCH', json: { roles: ['quality'] } })).status).toBe(200);
    expect((await c.json('/api/me')).status).toBe(401);
    const again = await signedIn(p.email, PASSWORD);
    expect((await again.json('/api/me')).body.user.roles).toEqual(['quality']);
  });
});

describe('sign-in time does not tell which accounts exist', () => {
  it('an unknown e-mail takes about as long as a wrong password for a real account', async () => {
    // A separate instance that trusts X-Forwarded-For, so every attempt comes from its own address and the
    // per-address limit of the shared test app is not touched.
    const app = await startAppInstance({ TRUST_PROXY: 'true', RUN_WORKER: 'false' });
    started.push(app);
    const known = await Promise.all([1, 2, 3, 4].map(() => person()));
    let n = 0;
    async function attempt(email: string) {
      const c = new Client(app.url);
      const ip = `198.51.100.${++n}`;
      const csrf = await c.json<{ csrfToken: string }>('/api/auth/csrf');
      const t0 = performance.now();
      const res = await c.fetch('/api/auth/callback/credentials', {
        method: 'POST',
        headers: { 'content-type': 'application/x-www-form-urlencoded', 'x-auth-return-redirect': '1', 'x-forwarded-for': ip },
        body: new URLSearchParams({ csrfToken: csrf.body.csrfToken, email, password: 'wrong password here', callbackUrl: '/' }),
      });
      const ms = performance.now() - t0;
      expect(((await res.json()) as { url: string }).url).toMatch(/error=/);
      return ms;
    }
    await attempt(known[0]!.email); // warm-up (first hash, prepared statements)
    const knownMs: number[] = [];
    const unknownMs: number[] = [];
    for (let round = 0; round < 3; round++) {
      for (const k of known) {
        knownMs.push(await attempt(k.email));
        unknownMs.push(await attempt(`${uniq('nobody')}@example.com`.toLowerCase()));
      }
    }
    const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)]!;
    // Without the dummy hash an unknown account answers in a small fraction of the time (no scrypt at all).
    // Both now run one scrypt; the bound leaves room for a busy machine.
    expect(median(unknownMs), `known ${median(knownMs).toFixed(0)} ms, unknown ${median(unknownMs).toFixed(0)} ms`).toBeGreaterThan(0.6 * median(knownMs));
  }, 120_000);
});
