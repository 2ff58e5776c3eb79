/**
 * Browser (Debian's chromium): the fleet page of a fleet larger than one page — the snapshot's time and
 * state, out-of-line units first, a pager whose next page lists other units — at phone, tablet and desktop
 * widths without sideways scrolling of the page (wide tables scroll in their own box).
 * FLEET_SCREENSHOTS=<folder> keeps a screenshot per width.
 */
import path from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb } from '../../src/lib/server/db';
import { computeFleetSnapshot } from '../../src/lib/server/fleet-snapshots';
import { seedFleet, type FleetFixture } from '../../scripts/fleet-fixture';
import { launchBrowser, signInPage } from '../support/browser';
import { BASE_URL, DEMO, uniq } from '../support/http';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
let browser: Browser;
let fleet: FleetFixture;

beforeAll(async () => {
  browser = await launchBrowser();
  fleet = await seedFleet(db.$client, { units: 120, seed: 5, prefix: uniq('FW'), exportLog: 0 });
  await computeFleetSnapshot(fleet.modelId, db);
}, 60_000);

afterAll(async () => {
  await browser?.close();
  await db.$client.end();
});

describe('fleet page at fleet size', () => {
  for (const width of [390, 768, 1440]) {
    it(`pages the units and does not scroll sideways at ${width} px`, async () => {
      const context = await browser.newContext({ viewport: { width, height: 900 } });
      const page = await context.newPage();
      await signInPage(page, DEMO.quality);
      await page.goto(`${BASE_URL}/fleet/${fleet.modelId}`);
      await expect(page.locator('[data-fleet-snapshot]').textContent()).resolves.toMatch(/Computed \d{4}-\d\d-\d\d .* UTC/);
      await expect(page.locator('[data-fleet-snapshot]').getAttribute('data-fleet-snapshot')).resolves.toBe('current');
      const pager = page.locator('[data-fleet-pager]');
      await expect(pager.textContent()).resolves.toMatch(/Units 1–25 of 120/);
      // Page 1 starts with the units out of line (the fixture has a few).
      const firstRows = await page.locator('[data-unit-row]').evaluateAll((rows) => rows.map((r) => r.getAttribute('data-unit-row')));
      expect(firstRows).toHaveLength(25);
      if (process.env.FLEET_SCREENSHOTS) await page.screenshot({ path: path.join(process.env.FLEET_SCREENSHOTS, `fleet-${width}.png`), fullPage: false });
      const wide = await page.evaluate(() => {
        const over = () => document.documentElement.scrollWidth - document.documentElement.clientWidth;
        if (over() <= 1) return [];
        // Which element makes the page wider (for the failure message): hide candidates one by one, innermost last.
        const found: string[] = [];
        for (const el of Array.from(document.querySelectorAll('main *')) as HTMLElement[]) {
          const before = el.style.display;
          el.style.display = 'none';
          const fixed = over() <= 1;
          el.style.display = before;
          if (fixed) found.push(`<${el.tagName.toLowerCase()} class="${el.getAttribute('class') ?? ''}" ${el.getAttribute('aria-label') ?? ''}>`);
        }
        return found.slice(-4);
      });
      expect(wide, 'elements wider than the window').toEqual([]);
      expect(await page.evaluate(() => document.documentElement.scrollWidth - document.documentElement.clientWidth)).toBeLessThanOrEqual(1);
      await pager.getByRole('link', { name: 'Next' }).click();
      await page.waitForURL('**/fleet/*?page=2');
      await expect(page.locator('[data-fleet-pager]').textContent()).resolves.toMatch(/Units 26–50 of 120/);
      const secondRows = await page.locator('[data-unit-row]').evaluateAll((rows) => rows.map((r) => r.getAttribute('data-unit-row')));
      expect(secondRows).toHaveLength(25);
      expect(secondRows.filter((s) => firstRows.includes(s))).toEqual([]);
      expect(await page.evaluate(() => document.documentElement.scrollWidth - document.documentElement.clientWidth)).toBeLessThanOrEqual(1);
      await context.close();
    });
  }
});
