/**
 * In a real browser: the API reference renders the app's OpenAPI document with the bundled renderer, with
 * nothing fetched from elsewhere, under a strict Content-Security-Policy (no inline or evaluated script);
 * an admin registers a webhook endpoint on /admin/webhooks and sees the secret once. Screenshots at 390,
 * 768 and 1440 px go to tmp/screens (git-ignored); no page scrolls sideways.
 */
import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { islandsHydrated, launchBrowser, signInPage, trackExternalRequests } from '../support/browser';
import { BASE_URL, DEMO, signedIn } from '../support/http';

const POLL = { timeout: 15_000 };
const WIDTHS = [390, 768, 1440];
const SHOTS = 'tmp/screens';
// No 'unsafe-inline' / 'unsafe-eval' for scripts: every script must be a file served by the app.
const STRICT_CSP = "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; img-src 'self' data:; font-src 'self' data:; connect-src 'self'; object-src 'none'; base-uri 'self'; frame-ancestors 'none'";

let browser: Browser;
beforeAll(async () => {
  browser = await launchBrowser();
  mkdirSync(SHOTS, { recursive: true });
});
afterAll(async () => {
  await browser?.close();
});

/** Serve the page's HTML with the strict policy and record every violation the browser reports. */
async function withStrictCsp(page: Page, path: string) {
  await page.addInitScript(() => {
    (window as unknown as { __csp: string[] }).__csp = [];
    document.addEventListener('securitypolicyviolation', (e) => (window as unknown as { __csp: string[] }).__csp.push(`${e.violatedDirective} ${e.blockedURI} ${e.sourceFile}:${e.lineNumber}`));
  });
  await page.route(`${BASE_URL}${path}`, async (route) => {
    const res = await route.fetch();
    await route.fulfill({ response: res, headers: { ...res.headers(), 'content-security-policy': STRICT_CSP } });
  });
}

const horizontalOverflow = (page: Page) => page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);

describe('API reference page', () => {
  it('renders every operation from the app’s own document under a strict CSP', async () => {
    const context = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    const page = await context.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, DEMO.technician);
    await withStrictCsp(page, '/api-reference');
    await page.goto(`${BASE_URL}/api-reference`);
    await page.locator('#api-reference[data-loaded="true"]').waitFor({ timeout: 30_000 });
    const doc = await (await fetch(`${BASE_URL}/api/openapi.json`)).json();
    const operations = Object.values(doc.paths as Record<string, object>).reduce((n, item) => n + Object.keys(item).length, 0);
    await expect.poll(() => page.locator('[data-operation]').count(), POLL).toBe(operations);
    await expect.poll(() => page.locator('[data-operation-path]', { hasText: '/api/units/{serial}/parameter-sets' }).count(), POLL).toBe(1);
    // The page is plain server-rendered HTML: no script of its own.
    const scripts = await page.evaluate(() => [...document.scripts].map((s) => ({ src: s.src, text: s.src ? '' : s.textContent!.trim() })));
    const violations = await page.evaluate(() => (window as unknown as { __csp: string[] }).__csp);
    const report = JSON.stringify({ violations, scripts: scripts.map((s) => s.src || s.text.slice(0, 80)) });
    // No eval and no blocked file.
    expect(violations.filter((v) => !v.includes(' inline '))).toEqual([]);
    expect(scripts.some((s) => /api-reference/.test(s.src)), report).toBe(false);
    // The only inline script is the app shell's sign-out handler (Astro inlines small scripts), which the
    // strict policy blocks on every page; none belongs to the reference.
    const inline = scripts.filter((s) => s.text);
    expect(inline.every((s) => s.text.includes('/api/auth/signout')), report).toBe(true);
    expect(violations.filter((v) => v.includes(' inline ')).length).toBeLessThanOrEqual(inline.length);
    expect(external).toEqual([]);

    // Opening an operation shows its roles and the problem format of its refusals.
    const operation = page.locator('[data-operation]', { has: page.locator('[data-operation-path]', { hasText: '/api/units/{serial}/parameter-sets' }) });
    await operation.locator('[data-operation-path]').click();
    await operation.getByText('Roles allowed: technician, engineer, quality, service, admin.').waitFor();
    await operation.getByText('Problem', { exact: false }).first().waitFor();
    for (const width of WIDTHS) {
      await page.setViewportSize({ width, height: 1000 });
      await page.screenshot({ path: `${SHOTS}/api-reference-${width}.png`, fullPage: false });
      expect(await horizontalOverflow(page), `api reference at ${width}px`).toBeLessThanOrEqual(0);
    }
    await context.close();
  });
});

describe('webhooks admin page', () => {
  it('registers an endpoint, shows its secret once, and lists it', async () => {
    const context = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    const page = await context.newPage();
    await signInPage(page, DEMO.admin);
    await page.goto(`${BASE_URL}/admin/webhooks`);
    await islandsHydrated(page);
    const url = `http://127.0.0.1:9/browser-test-${Date.now()}`;
    await page.locator('[data-webhook-form] input[name="url"]').fill(url);
    await page.locator('[data-webhook-form] input[value="fit.finished"]').check();
    await page.locator('[data-webhook-form] input[name="description"]').fill('browser test receiver');
    await page.getByRole('button', { name: 'Register endpoint' }).click();
    await expect.poll(() => page.locator('[data-webhook-secret]').textContent(), POLL).toMatch(/^whsec_/);
    await expect.poll(() => page.locator('[data-webhook-endpoints] tr', { hasText: url }).count(), POLL).toBe(1);
    for (const width of WIDTHS) {
      await page.setViewportSize({ width, height: 1000 });
      await page.screenshot({ path: `${SHOTS}/admin-webhooks-${width}.png`, fullPage: true });
      expect(await horizontalOverflow(page), `webhooks page at ${width}px`).toBeLessThanOrEqual(0);
    }
    // Clean up through the API: the endpoint must not collect other tests' events.
    const admin = await signedIn(DEMO.admin);
    const list = await admin.json('/api/admin/webhooks');
    const mine = list.body.endpoints.find((e: { url: string }) => e.url === url);
    expect((await admin.json(`/api/admin/webhooks/${mine.id}`, { method: 'DELETE' })).status).toBe(200);
    await context.close();
  });
});
