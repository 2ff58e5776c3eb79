/**
 * Browser (Debian's chromium): quality staff open a unit page, see the before/after accuracy map of the
 * current set (computed off the request thread, drawn by an island) and download its certificate. Screenshots
 * at 390, 768 and 1440 px go to tmp/ (git-ignored) for review; the page never scrolls sideways.
 */
import { mkdirSync } from 'node:fs';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb } from '../../src/lib/server/db';
import { launchBrowser, signInPage, trackExternalRequests } from '../support/browser';
import { approveSet, makeModel, makeUnit, moved, testArm } from '../support/approved-sets';
import { BASE_URL, DEMO, uniq } from '../support/http';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
let browser: Browser;
let serial = '', setId = '';

beforeAll(async () => {
  browser = await launchBrowser();
  const nominal = testArm();
  const m = await makeModel(db, nominal, uniq('Browser certificate '));
  const u = await makeUnit(db, m.revisionId, uniq('CERT-'));
  serial = u.serial;
  const s = await approveSet(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: moved(nominal, { 'J1.a': 0.4, 'J2.theta': 0.05, 'base.x': 1980, 'base.rz': 31 }), standardErrors: { 'J1.a': 0.002 } });
  setId = s.setId;
});
afterAll(async () => {
  await browser?.close();
  await db.$client.end();
});

describe('unit page: accuracy map and certificate', () => {
  it('shows the map with its scale at phone, tablet and desktop widths, and links the certificate', async () => {
    const page = await browser.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, DEMO.quality);
    mkdirSync('tmp', { recursive: true });
    for (const width of [390, 768, 1440]) {
      await page.setViewportSize({ width, height: 900 });
      await page.goto(`${BASE_URL}/units/${encodeURIComponent(serial)}`);
      // The island hydrates when it scrolls into view (client:visible).
      await page.locator('[data-accuracy-map-card]').scrollIntoViewIfNeeded();
      const map = page.locator('[data-accuracy-map]');
      await map.waitFor({ timeout: 60_000 });
      expect(await map.locator('svg').count()).toBe(3);
      expect(await map.locator('rect').count()).toBeGreaterThan(50);
      await expect.poll(() => page.locator('[data-map-scale]').textContent()).toMatch(/^\d+\.\d{3} mm$/);
      await page.screenshot({ path: `tmp/unit-accuracy-map-${width}.png`, fullPage: true });
      // The elements wider than the window, if any, name themselves in the failure.
      const wide = await page.evaluate((w) => [...document.querySelectorAll('body *')].filter((e) => e.getBoundingClientRect().right > w + 1).slice(0, 5).map((e) => `${e.tagName}.${e.className}`), width);
      expect(await page.evaluate(() => document.documentElement.scrollWidth), wide.join(' | ')).toBeLessThanOrEqual(width);
    }
    // Where the certificate (an export of the set) is offered, the safety caution is shown.
    expect(await page.locator('[data-safety-caution]').count()).toBeGreaterThan(0);
    const link = page.locator('[data-certificate-link]').first();
    expect(await link.getAttribute('href')).toBe(`/api/parameter-sets/${setId}/certificate`);
    const res = await page.request.get(`${BASE_URL}/api/parameter-sets/${setId}/certificate`);
    expect(res.status()).toBe(200);
    expect(res.headers()['content-type']).toBe('application/pdf');
    expect((await res.body()).subarray(0, 5).toString()).toBe('%PDF-');
    expect(external).toEqual([]);
    await page.close();
  }, 240_000);

  it('technicians see neither the map nor the certificate link', async () => {
    const page = await browser.newPage();
    await signInPage(page, DEMO.technician);
    await page.goto(`${BASE_URL}/units/${encodeURIComponent(serial)}`);
    await page.locator('[data-unit-parameter-sets]').waitFor();
    expect(await page.locator('[data-certificate-link]').count()).toBe(0);
    expect(await page.locator('[data-accuracy-map-card]').count()).toBe(0);
    await page.close();
  });
});
