/**
 * A technician uploads a session in Debian's chromium at tablet width: drop zone → metadata → upload →
 * session page with its charts and check figures; a bad file shows its problems table instead.
 */
import { readFileSync } from 'node:fs';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, units } from '../../src/db/schema';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { createDb } from '../../src/lib/server/db';
import { islandsHydrated, launchBrowser, signInPage, trackExternalRequests } from '../support/browser';
import { BASE_URL, DEMO, uniq } from '../support/http';
import { serviceEnv } from '../support/services';

const db = createDb(serviceEnv().databaseUrl, { max: 2 });
const geometry = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
const goodFile = readFileSync('test-data/orrin-r6-620-session.csv');
let browser: Browser;
let serial: string;

beforeAll(async () => {
  browser = await launchBrowser();
  const [model] = await db.insert(armModels).values({ name: uniq('BROWSER-R6-') }).returning();
  const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry }).returning();
  serial = uniq('BR-');
  await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Test hall', cell: 'B2' });
});
afterAll(async () => {
  await browser?.close();
  await db.$client.end();
});

describe('session upload in the browser', () => {
  it('drop zone → metadata → upload → session page with charts and check statistics', async () => {
    const context = await browser.newContext({ viewport: { width: 768, height: 1024 } });
    const page = await context.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, DEMO.technician);
    await page.goto(`${BASE_URL}/sessions/new?unit=${serial}`);
    await page.locator('[data-file-input]').setInputFiles({ name: 'visit-1.csv', mimeType: 'text/csv', buffer: goodFile });
    await expect(page.locator('[data-chosen-file]').textContent()).resolves.toContain('visit-1.csv');
    expect(await page.getByLabel('Unit (serial number)').inputValue()).toBe(serial);
    await page.getByLabel('Laser tracker / instrument id').fill('tracker LT-99');
    await page.getByLabel('Ambient temperature (°C)').fill('22.5');
    await page.getByLabel('Target (SMR) and mounting').fill('1.5 in SMR, nest A');
    // Touch targets stay at least 40 px high on a tablet.
    const box = await page.getByRole('button', { name: 'Upload session' }).boundingBox();
    expect(box!.height).toBeGreaterThanOrEqual(40);
    await Promise.all([page.waitForURL(/\/sessions\/[0-9a-f-]{36}$/, { timeout: 30_000 }), page.getByRole('button', { name: 'Upload session' }).click()]);

    await expect(page.locator('[data-session-title]').textContent()).resolves.toContain(serial);
    await expect(page.locator('[data-meta]').textContent()).resolves.toContain('tracker LT-99');
    const rms = Number(await page.locator('[data-rms]').textContent());
    expect(rms).toBeGreaterThan(0);
    // Charts drawn: one dot per pose in both projections, bars for the nominal error.
    const rows = goodFile.toString().trim().split('\n').length - 1;
    await page.locator('[data-chart="points"] .recharts-scatter-symbol').first().waitFor({ timeout: 15_000 });
    expect(await page.locator('[data-chart="points"] .recharts-scatter-symbol').count()).toBe(2 * rows);
    await page.locator('[data-chart="errors"] .recharts-bar-rectangle').first().waitFor();
    expect(await page.locator('[data-chart="errors"] .recharts-bar-rectangle').count()).toBe(rows);
    expect(await page.locator('[data-chart="points"]').textContent()).toContain('x (mm)');
    // The numbers behind the error chart are one click away.
    await page.locator('[data-chart="errors"]').getByRole('button', { name: /Show the numbers/ }).click();
    expect(await page.locator('[data-errors-table] tbody tr').count()).toBe(rows);
    await expect(page.locator('[data-quality]').textContent()).resolves.toMatch(/Observability O1/);
    expect(await page.locator('[data-poses] tbody tr').count()).toBe(Math.min(50, rows));
    // No horizontal overflow of the page at 768 px.
    expect(await page.evaluate(() => document.documentElement.scrollWidth)).toBeLessThanOrEqual(768);
    expect(external).toEqual([]);
    await context.close();
  });

  it('a bad file shows every problem in a table, and the override for outside-limit readings', async () => {
    const context = await browser.newContext({ viewport: { width: 768, height: 1024 } });
    const page = await context.newPage();
    await signInPage(page, DEMO.technician);
    await page.goto(`${BASE_URL}/sessions/new?unit=${serial}`);
    const bad = 'pose,q1,q2,q3,q4,q5,q6,x,y,z\nP1,10,-20,30,0,45,0,2180.5,-512.3,640.1\nP2,-15,abc,55,20,-30,90,2050.2,-820.7,720.4\n';
    await page.locator('[data-file-input]').setInputFiles({ name: 'bad.csv', mimeType: 'text/csv', buffer: Buffer.from(bad) });
    await page.getByRole('button', { name: 'Upload session' }).click();
    const table = page.locator('[data-problems]');
    await table.waitFor({ timeout: 15_000 });
    const cells = await table.locator('tbody tr').first().locator('td').allTextContents();
    expect(cells.slice(0, 3)).toEqual(['3', 'q2', '"abc" is not a number']);
    expect(cells[3]).toMatch(/decimal number in deg/);
    expect(page.url()).toContain('/sessions/new');

    // Outside the model's limits: offered the override, then stored.
    const outside = 'pose,q1,q2,q3,q4,q5,q6,x,y,z\nP1,10,-20,30,0,45,0,2180.5,-512.3,640.1\nP2,171.5,-35,55,20,-30,90,2050.2,-820.7,720.4\nP3,40,10,-20,5,60,-45,1990.0,-400.2,810.3\n';
    await page.locator('[data-file-input]').setInputFiles({ name: 'outside.csv', mimeType: 'text/csv', buffer: Buffer.from(outside) });
    await page.getByRole('button', { name: 'Upload session' }).click();
    await page.locator('[data-override]').waitFor({ timeout: 15_000 });
    expect(await page.locator('[data-problems] tbody tr').first().locator('td').allTextContents()).toEqual(expect.arrayContaining(['3', 'q1']));
    const again = page.getByRole('button', { name: 'Upload again with the override' });
    expect(await again.isDisabled()).toBe(true);
    await page.locator('[data-override] input[type=checkbox]').check();
    await Promise.all([page.waitForURL(/\/sessions\/[0-9a-f-]{36}$/, { timeout: 30_000 }), again.click()]);
    await expect(page.locator('.notice-attention').first().textContent()).resolves.toMatch(/outside-limits override/);
    await context.close();
  });

  it('keeps a file chosen before the form finished loading', async () => {
    const context = await browser.newContext({ viewport: { width: 768, height: 1024 } });
    const page = await context.newPage();
    await signInPage(page, DEMO.technician);
    // Hold back the upload island's script, as a slow connection in the cell would.
    let release!: () => void;
    const held = new Promise<void>((r) => (release = r));
    await page.route(/\/_astro\/UploadForm[^/]*\.js$/, async (route) => {
      await held;
      await route.continue();
    });
    await page.goto(`${BASE_URL}/sessions/new?unit=${serial}`, { waitUntil: 'domcontentloaded' });
    await page.locator('[data-file-input]').setInputFiles({ name: 'early.csv', mimeType: 'text/csv', buffer: goodFile });
    expect(await page.locator('astro-island[ssr]').count()).toBeGreaterThan(0);
    release();
    await islandsHydrated(page);
    const button = page.getByRole('button', { name: 'Upload session' });
    // The island takes the early file in an effect after hydrating: give that render a moment.
    await expect.poll(() => button.isEnabled(), { timeout: 10_000 }).toBe(true);
    await context.close();
  });
});
