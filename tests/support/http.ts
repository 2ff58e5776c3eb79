/**
 * HTTP helpers for integration tests against the app that scripts/test.mjs started (BASE_URL).
 * `signIn` goes through Auth.js's real credentials flow and keeps the cookies like a browser would.
 */
// vitest sets BASE_URL to Vite's base path, so the harness exports the app's address under its own name.
export const BASE_URL = process.env.OFFSETRY_TEST_BASE_URL ?? 'http://127.0.0.1:4321';
export const DEMO_PASSWORD = process.env.DEMO_PASSWORD ?? 'offsetry-demo';

export class Client {
  private cookies = new Map<string, string>();
  constructor(
    readonly base = BASE_URL,
    private bearer?: string,
  ) {}

  private cookieHeader() {
    return [...this.cookies].map(([k, v]) => `${k}=${v}`).join('; ');
  }

  async fetch(path: string, init: RequestInit & { json?: unknown } = {}): Promise<Response> {
    const headers = new Headers(init.headers);
    if (this.cookies.size) headers.set('cookie', this.cookieHeader());
    if (this.bearer) headers.set('authorization', `Bearer ${this.bearer}`);
    const method = (init.method ?? 'GET').toUpperCase();
    if (method !== 'GET' && method !== 'HEAD' && !headers.has('origin')) headers.set('origin', this.base);
    let body = init.body;
    if (init.json !== undefined) {
      headers.set('content-type', 'application/json');
      body = JSON.stringify(init.json);
    }
    const res = await fetch(new URL(path, this.base), { ...init, headers, body, redirect: 'manual' });
    for (const c of res.headers.getSetCookie()) {
      const [pair] = c.split(';');
      const i = pair!.indexOf('=');
      const name = pair!.slice(0, i).trim();
      const value = pair!.slice(i + 1).trim();
      if (/max-age=0|expires=Thu, 01 Jan 1970/i.test(c) || value === '') this.cookies.delete(name);
      else this.cookies.set(name, value);
    }
    return res;
  }

  async json<T = any>(path: string, init: RequestInit & { json?: unknown } = {}): Promise<{ status: number; body: T }> {
    const res = await this.fetch(path, init);
    const text = await res.text();
    let body: any;
    try {
      body = text ? JSON.parse(text) : undefined;
    } catch {
      body = text;
    }
    return { status: res.status, body };
  }

  /** Sign in with e-mail and password; returns the Auth.js redirect URL (contains error= on failure). */
  async signIn(email: string, password = DEMO_PASSWORD): Promise<string> {
    const csrf = await this.json<{ csrfToken: string }>('/api/auth/csrf');
    const res = await this.fetch('/api/auth/callback/credentials', {
      method: 'POST',
      headers: { 'content-type': 'application/x-www-form-urlencoded', 'x-auth-return-redirect': '1' },
      body: new URLSearchParams({ csrfToken: csrf.body.csrfToken, email, password, callbackUrl: '/' }),
    });
    const out = (await res.json()) as { url: string };
    return out.url;
  }

  hasSession() {
    return [...this.cookies.keys()].some((k) => k.includes('authjs.session-token'));
  }
}

/** A client signed in as a demo user (fails the test when sign-in fails). */
export async function signedIn(email: string, password = DEMO_PASSWORD, base = BASE_URL): Promise<Client> {
  const c = new Client(base);
  const url = await c.signIn(email, password);
  if (url.includes('error=') || !c.hasSession()) throw new Error(`sign-in as ${email} failed: ${url}`);
  return c;
}

export const DEMO = {
  technician: 'technician@example.com',
  engineer: 'engineer@example.com',
  engineer2: 'engineer2@example.com',
  quality: 'quality@example.com',
  service: 'service@example.com',
  admin: 'admin@example.com',
} as const;

/** A unique suffix so parallel test files never collide on names or serial numbers. */
export const uniq = (prefix = '') => `${prefix}${Date.now().toString(36)}${Math.random().toString(36).slice(2, 7)}`.toUpperCase();
