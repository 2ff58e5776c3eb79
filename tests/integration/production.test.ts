/**
 * Production mode: configuration from the environment checked at start (scripts/serve.mjs and the app's own
 * first-use check), demo accounts and the example secret refused, session cookie attributes, the secret not
 * baked into the build, and request ids that come back and land in the app's log.
 *
 * Production instances are extra app processes started through the harness (same database, S3 and mail).
 */
import { spawn } from 'node:child_process';
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import { randomBytes } from 'node:crypto';
import { dirname, join, resolve } from 'node:path';
import { eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { users } from '../../src/db/schema';
import { EXAMPLE_SECRET } from '../../src/lib/server/config';
import { createDb } from '../../src/lib/server/db';
import { createApiToken, upsertUserWithPassword } from '../../src/lib/server/users';
import { Client, DEMO, uniq } from '../support/http';
import { harnessStatus, requireEnv, startAppInstance, type AppInstance } from '../support/services';
import { poll } from '../support/wait';

const root = resolve(new URL('../..', import.meta.url).pathname);
const db = createDb(requireEnv('DATABASE_URL'), { max: 2 });
const started: AppInstance[] = [];
afterAll(async () => {
  for (const a of started) await a.stop().catch(() => undefined);
  await db.$client.end();
});

/** Run scripts/serve.mjs with exactly `env` (plus PATH) and collect its exit code and output. */
function serve(env: Record<string, string>, args: string[] = []): Promise<{ code: number | null; out: string }> {
  return new Promise((done) => {
    const child = spawn(process.execPath, ['scripts/serve.mjs', ...args], { cwd: root, env: { PATH: process.env.PATH ?? '', ...env } });
    let out = '';
    child.stdout.on('data', (c) => (out += c));
    child.stderr.on('data', (c) => (out += c));
    child.once('exit', (code) => done({ code, out }));
  });
}

/** The run's service settings plus a fresh secret in production mode: a baseline that passes the check. */
function completeEnv(overrides: Record<string, string | undefined> = {}): Record<string, string> {
  const keys = [
    'DATABASE_URL', 'S3_ENDPOINT', 'S3_REGION', 'S3_BUCKET', 'S3_ACCESS_KEY_ID', 'S3_SECRET_ACCESS_KEY', 'S3_FORCE_PATH_STYLE',
    'SMTP_HOST', 'SMTP_PORT', 'SMTP_SECURE', 'MAIL_FROM', 'PUBLIC_BASE_URL',
  ];
  const env: Record<string, string> = { OFFSETRY_MODE: 'production', AUTH_SECRET: randomBytes(32).toString('base64url') };
  for (const k of keys) if (process.env[k]) env[k] = process.env[k]!;
  for (const [k, v] of Object.entries(overrides)) {
    if (v === undefined) delete env[k];
    else env[k] = v;
  }
  return env;
}

/** Whether `check` comes true within the time. */
const cameTrue = async (check: () => Promise<boolean>, timeoutMs = 10_000) => (await poll(check, Boolean, { timeoutMs, intervalMs: 100 })).done;

describe('scripts/serve.mjs checks the configuration before starting', () => {
  it('lists every missing and malformed variable and exits with 78', async () => {
    const res = await serve(completeEnv({ DATABASE_URL: undefined, S3_BUCKET: undefined, SMTP_PORT: 'twenty-five', PUBLIC_BASE_URL: 'not a url' }), ['--check']);
    expect(res.code).toBe(78);
    expect(res.out).toMatch(/4 problems/);
    expect(res.out).toMatch(/DATABASE_URL: is not set/);
    expect(res.out).toMatch(/S3_BUCKET: is not set/);
    expect(res.out).toMatch(/SMTP_PORT: must be a port number/);
    expect(res.out).toMatch(/PUBLIC_BASE_URL: /);
    expect(res.out).toMatch(/server was not started/);
  });

  it('refuses the example secret in production, and any secret under 32 characters', async () => {
    const example = await serve(completeEnv({ AUTH_SECRET: EXAMPLE_SECRET }), ['--check']);
    expect(example.code).toBe(78);
    expect(example.out).toMatch(/AUTH_SECRET: the example secret is refused in production/);
    const short = await serve(completeEnv({ AUTH_SECRET: 'x'.repeat(31) }), ['--check']);
    expect(short.code).toBe(78);
    expect(short.out).toMatch(/AUTH_SECRET: must be at least 32 characters/);
  });

  it('accepts a complete production configuration', async () => {
    const res = await serve(completeEnv(), ['--check']);
    expect(res.out).toMatch(/configuration complete \(OFFSETRY_MODE=production\)/);
    expect(res.code).toBe(0);
  });
});

describe('the built server checks the configuration at first use', () => {
  it('answers 503, logs every problem and exits when started directly with a bad configuration', async () => {
    const app = await startAppInstance({ OFFSETRY_MODE: 'production', AUTH_SECRET: EXAMPLE_SECRET, SMTP_PORT: '99999', RUN_WORKER: 'false' });
    started.push(app);
    const res = await fetch(`${app.url}/api/health`);
    expect(res.status).toBe(503);
    expect(((await res.json()) as { error: string }).error).toMatch(/not configured completely/);
    const gone = await cameTrue(async () => !(await harnessStatus()).apps.some((a) => a.id === app.id));
    expect(gone, 'the instance should have exited').toBe(true);
    const logText = readFileSync(app.logFile, 'utf8');
    expect(logText).toMatch(/AUTH_SECRET: the example secret is refused/);
    expect(logText).toMatch(/SMTP_PORT: /);
  });
});

describe('a production instance', () => {
  let app: AppInstance;
  const email = `ops-${uniq().toLowerCase()}@offsetry.test`;
  const password = 'a long production password 7';

  beforeAll(async () => {
    app = await startAppInstance({ OFFSETRY_MODE: 'production', AUTH_SECRET: randomBytes(32).toString('base64url'), RUN_WORKER: 'false' });
    started.push(app);
    await upsertUserWithPassword({ email, name: 'Ops Check', roles: ['engineer'], password, isDemo: false }, db);
  });

  it('refuses demo accounts by password and by token', async () => {
    const demo = new Client(app.url);
    expect(await demo.signIn(DEMO.engineer)).toMatch(/error=/);
    expect(demo.hasSession()).toBe(false);
    // A token of a demo user, made in the demo instance, is worthless in production.
    const [row] = await db.select({ id: users.id }).from(users).where(eq(users.email, DEMO.engineer));
    const token = await createApiToken(row!.id, 'demo token', db);
    expect((await new Client(undefined, token.token).json('/api/me')).status).toBe(200);
    expect((await new Client(app.url, token.token).json('/api/me')).status).toBe(401);
  });

  it('sets the session cookie httpOnly, SameSite=Lax and Secure', async () => {
    const client = new Client(app.url);
    const csrf = await client.json<{ csrfToken: string }>('/api/auth/csrf');
    const res = await client.fetch('/api/auth/callback/credentials', {
      method: 'POST',
      headers: { 'content-type': 'application/x-www-form-urlencoded', 'x-auth-return-redirect': '1' },
      body: new URLSearchParams({ csrfToken: csrf.body.csrfToken, email, password, callbackUrl: '/' }),
    });
    const session = res.headers.getSetCookie().find((c) => /session-token=/.test(c));
    expect(session, res.headers.getSetCookie().join('\n')).toBeDefined();
    expect(session).toMatch(/^__Secure-authjs\.session-token=/);
    expect(session).toMatch(/;\s*HttpOnly/i);
    expect(session).toMatch(/;\s*SameSite=Lax/i);
    expect(session).toMatch(/;\s*Secure/i);
    // The cookie works (the jar sends it back even over this loopback http).
    const me = await client.json('/api/me');
    expect(me.status).toBe(200);
    expect(me.body.user.email).toBe(email);
  });

  it('the demo instance sets the same cookie without Secure (plain http on loopback)', async () => {
    const client = new Client();
    const csrf = await client.json<{ csrfToken: string }>('/api/auth/csrf');
    const res = await client.fetch('/api/auth/callback/credentials', {
      method: 'POST',
      headers: { 'content-type': 'application/x-www-form-urlencoded', 'x-auth-return-redirect': '1' },
      body: new URLSearchParams({ csrfToken: csrf.body.csrfToken, email: DEMO.quality, password: process.env.DEMO_PASSWORD ?? 'offsetry-demo', callbackUrl: '/' }),
    });
    const session = res.headers.getSetCookie().find((c) => /session-token=/.test(c));
    expect(session).toMatch(/^authjs\.session-token=/);
    expect(session).toMatch(/;\s*HttpOnly/i);
    expect(session).toMatch(/;\s*SameSite=Lax/i);
    expect(session).not.toMatch(/;\s*Secure/i);
  });

  it('echoes a request id and writes it into its JSON log; makes one up when none is sent', async () => {
    const id = `ops-check-${uniq().toLowerCase()}`;
    const res = await fetch(`${app.url}/api/health`, { headers: { 'x-request-id': id } });
    expect(res.headers.get('x-request-id')).toBe(id);
    const line = await cameTrue(async () => readFileSync(app.logFile, 'utf8').includes(id), 5000);
    expect(line).toBe(true);
    const entry = readFileSync(app.logFile, 'utf8')
      .split('\n')
      .filter((l) => l.includes(id))
      .map((l) => JSON.parse(l) as Record<string, unknown>)[0]!;
    expect(entry).toMatchObject({ level: 'info', msg: 'request', requestId: id, method: 'GET', path: '/api/health' });
    expect(typeof entry.ms).toBe('number');

    const fresh = await fetch(`${app.url}/api/me`);
    expect(fresh.status).toBe(401);
    expect(fresh.headers.get('x-request-id')).toMatch(/^[0-9a-f-]{36}$/);
    // An id with characters outside the allowed set is replaced, so logs cannot be forged with newlines.
    const forged = await fetch(`${app.url}/api/health`, { headers: { 'x-request-id': 'a b"c' } });
    expect(forged.headers.get('x-request-id')).toMatch(/^[0-9a-f-]{36}$/);
  });
});

describe('the build carries no secret', () => {
  it('AUTH_SECRET of this run appears in no file of the built app', () => {
    const secret = requireEnv('AUTH_SECRET');
    const distDir = dirname(dirname(requireEnv('OFFSETRY_APP_ENTRY')));
    expect(existsSync(join(distDir, 'server', 'entry.mjs'))).toBe(true);
    const hits: string[] = [];
    let files = 0;
    const walk = (dir: string) => {
      for (const name of readdirSync(dir)) {
        const file = join(dir, name);
        if (statSync(file).isDirectory()) walk(file);
        else if (/\.(m?js|json|html|map|css|txt)$/.test(name)) {
          files++;
          if (readFileSync(file, 'utf8').includes(secret)) hits.push(file);
        }
      }
    };
    walk(distDir);
    expect(files).toBeGreaterThan(20);
    expect(hits).toEqual([]);
  });
});
