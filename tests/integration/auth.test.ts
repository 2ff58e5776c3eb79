import { describe, expect, it } from 'vitest';
import { Client, DEMO, signedIn, uniq } from '../support/http';
import { waitForMail } from '../support/services';

/** The invitation mail to `email` (the outbox sender runs every second). */
const invitationFor = (email: string) => waitForMail((m) => m.to.toLowerCase().includes(email) && /invited/i.test(m.subject), 20_000);

describe('sign-in', () => {
  it('signs in each demo user with the demo password and carries the roles', async () => {
    const c = await signedIn(DEMO.engineer);
    const me = await c.json('/api/me');
    expect(me.status).toBe(200);
    expect(me.body.user.email).toBe(DEMO.engineer);
    expect(me.body.user.roles).toEqual(['engineer']);
  });

  it('refuses a wrong password without a session', async () => {
    const c = new Client();
    const url = await c.signIn(DEMO.quality, 'not-the-password');
    expect(url).toMatch(/error=/);
    expect((await c.json('/api/me')).status).toBe(401);
  });

  it('rate-limits repeated failures for one address, even with the right password afterwards', async () => {
    // Invite a fresh person so the limit cannot disturb other tests' demo users.
    const admin = await signedIn(DEMO.admin);
    const email = `${uniq('rl')}@example.com`.toLowerCase();
    const invited = await admin.json('/api/admin/users', { method: 'POST', json: { email, name: 'Rate Limit', roles: ['quality'] } });
    expect(invited.status).toBe(201);
    const mail = await invitationFor(email);
    const token = /\/invite\/([\w-]+)/.exec(mail.text ?? '')![1]!;
    expect((await new Client().json(`/api/invitations/${token}`, { method: 'POST', json: { password: 'correct horse battery' } })).status).toBe(200);
    for (let i = 0; i < 5; i++) expect(await new Client().signIn(email, 'wrong password ' + i)).toMatch(/error=/);
    const url = await new Client().signIn(email, 'correct horse battery');
    expect(url).toMatch(/code=rate_limited/);
  });

  it('signs out', async () => {
    const c = await signedIn(DEMO.service);
    const csrf = await c.json<{ csrfToken: string }>('/api/auth/csrf');
    const res = await c.fetch('/api/auth/signout', {
      method: 'POST',
      headers: { 'content-type': 'application/x-www-form-urlencoded', 'x-auth-return-redirect': '1' },
      body: new URLSearchParams({ csrfToken: csrf.body.csrfToken }),
    });
    expect(res.status).toBe(200);
    expect((await c.json('/api/me')).status).toBe(401);
  });

  it('redirects pages to sign-in when anonymous', async () => {
    const res = await new Client().fetch('/units');
    expect(res.status).toBe(303);
    expect(res.headers.get('location')).toBe('/signin?next=%2Funits');
  });

  it('shows the forbidden page with 403 for a page outside the role', async () => {
    const c = await signedIn(DEMO.technician);
    const res = await c.fetch('/admin/people');
    expect(res.status).toBe(403);
    expect(await res.text()).toContain('Not available for your role');
  });
});

describe('invitation by e-mail', () => {
  it('delivers a one-time link through the mail server that sets a password which then signs in', async () => {
    const admin = await signedIn(DEMO.admin);
    const email = `${uniq('inv')}@example.com`.toLowerCase();
    const res = await admin.json('/api/admin/users', { method: 'POST', json: { email, name: 'New Technician', roles: ['technician', 'quality'] } });
    expect(res.status).toBe(201);
    expect(res.body.user.hasPassword).toBe(false);

    const mail = await invitationFor(email);
    const link = /(http:\/\/\S+\/invite\/[\w-]+)/.exec(mail.text ?? '')?.[1];
    expect(link).toBeDefined();
    const token = link!.split('/invite/')[1]!;

    // Before the password is set, nobody can sign in as this person.
    expect(await new Client().signIn(email, 'anything at all')).toMatch(/error=/);
    const anon = new Client();
    expect((await anon.json(`/api/invitations/${token}`)).body.email).toBe(email);
    expect((await anon.json(`/api/invitations/${token}`, { method: 'POST', json: { password: 'short' } })).status).toBe(400);
    expect((await anon.json(`/api/invitations/${token}`, { method: 'POST', json: { password: 'a long enough password' } })).status).toBe(200);
    // The link works once.
    expect((await anon.json(`/api/invitations/${token}`, { method: 'POST', json: { password: 'another long password' } })).status).toBe(404);

    const user = await signedIn(email, 'a long enough password');
    expect((await user.json('/api/me')).body.user.roles.sort()).toEqual(['quality', 'technician']);
  });

  it('refuses an invitation with no role or a bad address, listing the fields', async () => {
    const admin = await signedIn(DEMO.admin);
    const res = await admin.json('/api/admin/users', { method: 'POST', json: { email: 'not-an-address', name: '', roles: [] } });
    expect(res.status).toBe(400);
    const fields = res.body.errors.map((e: { field: string }) => e.field).sort();
    expect(fields).toEqual(['email', 'name', 'roles']);
  });
});

describe('administering people', () => {
  it('changes roles and deactivates a user, ending the existing sessions at once', async () => {
    const admin = await signedIn(DEMO.admin);
    const email = `${uniq('deact')}@example.com`.toLowerCase();
    await admin.json('/api/admin/users', { method: 'POST', json: { email, name: 'Short Stay', roles: ['technician'] } });
    const mail = await invitationFor(email);
    const token = /\/invite\/([\w-]+)/.exec(mail.text ?? '')![1]!;
    await new Client().json(`/api/invitations/${token}`, { method: 'POST', json: { password: 'temporary password 1' } });
    const person = await signedIn(email, 'temporary password 1');
    expect((await person.json('/api/admin/users')).status).toBe(403);

    const list = await admin.json('/api/admin/users');
    const id = list.body.users.find((u: { email: string }) => u.email === email).id;
    expect((await admin.json(`/api/admin/users/${id}`, { method: 'PATCH', json: { roles: ['technician', 'admin'] } })).status).toBe(200);
    // A role change ends the sessions signed in under the old roles; signing in again carries the new ones.
    expect((await person.json('/api/me')).status).toBe(401);
    const again = await signedIn(email, 'temporary password 1');
    expect((await again.json('/api/admin/users')).status).toBe(200);

    expect((await admin.json(`/api/admin/users/${id}`, { method: 'PATCH', json: { active: false } })).status).toBe(200);
    expect((await again.json('/api/me')).status).toBe(401);
    expect(await new Client().signIn(email, 'temporary password 1')).toMatch(/error=/);
  });

  it('does not let an admin lock themselves out', async () => {
    const admin = await signedIn(DEMO.admin);
    const me = (await admin.json('/api/me')).body.user;
    const res = await admin.json(`/api/admin/users/${me.id}`, { method: 'PATCH', json: { active: false } });
    expect(res.status).toBe(400);
  });
});

describe('API tokens', () => {
  it('acts with the owner’s roles and stops working when revoked', async () => {
    const eng = await signedIn(DEMO.engineer);
    const created = await eng.json('/api/tokens', { method: 'POST', json: { name: 'script' } });
    expect(created.status).toBe(201);
    const bearer = new Client(undefined, created.body.token);
    expect((await bearer.json('/api/me')).body.user).toMatchObject({ email: DEMO.engineer, via: 'token' });
    expect((await bearer.json('/api/admin/users')).status).toBe(403);
    expect((await eng.json(`/api/tokens/${created.body.id}`, { method: 'DELETE' })).status).toBe(200);
    expect((await bearer.json('/api/me')).status).toBe(401);
    expect((await new Client(undefined, 'ofs_made-up-token').json('/api/me')).status).toBe(401);
  });
});

describe('cross-site requests', () => {
  it('refuses a state-changing cookie request from another origin or without an Origin header', async () => {
    const admin = await signedIn(DEMO.admin);
    const evil = await admin.json('/api/tokens', { method: 'POST', json: { name: 'x' }, headers: { origin: 'http://evil.example' } });
    expect(evil.status).toBe(403);
    expect(evil.body.error).toMatch(/Cross-site/);
    const none = await admin.fetch('/api/tokens', { method: 'POST', body: '{"name":"x"}', headers: { 'content-type': 'application/json', origin: '' } });
    expect(none.status).toBe(403);
  });
});
