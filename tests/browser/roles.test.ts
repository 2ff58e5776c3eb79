import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { navigationFor, ROLES, type Role } from '../../src/lib/shared/roles';
import { launchBrowser, signInPage, trackExternalRequests } from '../support/browser';
import { BASE_URL, DEMO } from '../support/http';

let browser: Browser;
beforeAll(async () => {
  browser = await launchBrowser();
});
afterAll(async () => {
  await browser?.close();
});

const emailFor: Record<Role, string> = {
  technician: DEMO.technician,
  engineer: DEMO.engineer,
  quality: DEMO.quality,
  service: DEMO.service,
  admin: DEMO.admin,
};

describe('each role signs in and sees its own home and navigation', () => {
  it.each(ROLES.map((r) => [r]))('%s', async (role) => {
    const context = await browser.newContext({ viewport: { width: 768, height: 1024 } });
    const page = await context.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, emailFor[role]);
    expect(new URL(page.url()).pathname).toBe('/');
    await expect(page.locator(`[data-home-role="${role}"]`).count()).resolves.toBe(1);
    const shown = await page.locator('nav[aria-label="Main"] a').evaluateAll((as) => as.map((a) => a.getAttribute('href')));
    expect(shown).toEqual(navigationFor([role]).map((n) => n.href));
    expect(await page.locator('[data-user-email]').textContent()).toBe(emailFor[role]);
    // Fonts and scripts ship with the app: nothing leaves 127.0.0.1.
    const fontLoaded = await page.evaluate(async () => {
      await document.fonts.ready;
      return document.fonts.check('16px "Source Sans 3 Variable"');
    });
    expect(fontLoaded).toBe(true);
    expect(external).toEqual([]);
    await context.close();
  });
});

describe('refusals and sign-out', () => {
  it('refuses an admin page to a technician, then signs out', async () => {
    const context = await browser.newContext();
    const page = await context.newPage();
    await signInPage(page, DEMO.technician);
    const res = await page.goto(`${BASE_URL}/admin/people`);
    expect(res?.status()).toBe(403);
    await expect(page.locator('[data-forbidden]').count()).resolves.toBe(1);
    await page.getByRole('button', { name: 'Sign out' }).click();
    await page.waitForURL(/\/signin/);
    const after = await page.goto(`${BASE_URL}/units`);
    expect(new URL(page.url()).pathname).toBe('/signin');
    expect(after?.status()).toBe(200);
    await context.close();
  });

  it('shows a clear message for a wrong password', async () => {
    const context = await browser.newContext();
    const page = await context.newPage();
    await page.goto(`${BASE_URL}/signin`);
    await page.getByLabel('E-mail').fill(DEMO.engineer2);
    await page.getByLabel('Password').fill('definitely wrong');
    await page.getByRole('button', { name: 'Sign in' }).click();
    await expect(page.getByRole('alert').textContent()).resolves.toMatch(/not right/);
    await context.close();
  });
});
