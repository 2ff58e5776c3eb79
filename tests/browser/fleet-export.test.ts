/**
 * Browser (Debian's chromium): quality staff see the fleet view with a unit flagged out of line and open
 * its drift chart; a service manager exports a batch and gets a zip download.
 */
import { readFile } from 'node:fs/promises';
import JSZip from 'jszip';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb } from '../../src/lib/server/db';
import { checkDriftOnApproval } from '../../src/lib/server/drift';
import { launchBrowser, signInPage, trackExternalRequests } from '../support/browser';
import { approveSet, makeModel, makeUnit, moved, testArm } from '../support/approved-sets';
import { BASE_URL, DEMO, uniq } from '../support/http';

const db = createDb(process.env.DATABASE_URL!, { max: 2 });
let browser: Browser;
const nominal = testArm();
let modelId = '', modelName = '';
const serials: string[] = [];
let outlier = '';

beforeAll(async () => {
  browser = await launchBrowser();
  const m = await makeModel(db, nominal, uniq('Browser fleet '));
  modelId = m.modelId;
  modelName = m.name;
  const tag = uniq('BR-');
  // Five units; the fifth's J1.a is far from the other four (0.01 … 0.04 mm vs 0.9 mm).
  const j1a = [0.01, 0.02, 0.03, 0.04, 0.9];
  for (let i = 0; i < j1a.length; i++) {
    const u = await makeUnit(db, m.revisionId, `${tag}-${i + 1}`);
    serials.push(u.serial);
    await approveSet(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: moved(nominal, { 'J1.a': 0.01 }), standardErrors: { 'J1.a': 0.003 }, approvedAt: new Date('2026-01-10T10:00:00Z') });
    await db.transaction(async (tx) => {
      const s = await approveSet(tx, { unitId: u.unitId, revisionId: m.revisionId, geometry: moved(nominal, { 'J1.a': j1a[i]! }), standardErrors: { 'J1.a': 0.004 } });
      await checkDriftOnApproval(tx, { unitId: u.unitId, newSetId: s.setId, baseUrl: BASE_URL });
    });
  }
  outlier = serials[4]!;
});

afterAll(async () => {
  await browser?.close();
  await db.$client.end();
});

describe('fleet and export in the browser', () => {
  it('quality: fleet view flags the out-of-limit unit, then its drift chart opens', async () => {
    const context = await browser.newContext({ viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, DEMO.quality);
    await page.goto(`${BASE_URL}/fleet`);
    await page.getByRole('link', { name: modelName }).click();
    await page.waitForURL(`**/fleet/${modelId}`);
    const outsideList = page.locator('[data-outside-list]');
    await outsideList.waitFor();
    const row = outsideList.locator('tr', { hasText: outlier });
    await expect(row.textContent()).resolves.toMatch(/J1\.a[\s\S]*▲ out of line/);
    // Only the outlier is listed.
    await expect(outsideList.locator('tbody tr').count()).resolves.toBe(1);
    // The distribution chart of the flagged parameter is drawn (a recharts SVG).
    await page.locator('[data-distribution="J1.a"] svg.recharts-surface').first().waitFor();
    // The matrix marks the unit's cell with the icon and prints the σ value.
    const cell = page.locator(`[data-unit-row="${outlier}"] td`, { hasText: '▲' });
    await expect(cell.count()).resolves.toBeGreaterThan(0);

    await row.getByRole('link', { name: outlier }).click();
    await page.waitForURL(`**/units/${outlier}/drift`);
    await page.locator('[data-drift-chart="J1.a"] svg.recharts-surface').first().waitFor();
    await expect(page.locator('[data-attention]').textContent()).resolves.toMatch(/marked for attention/);
    await expect(page.locator('td .badge', { hasText: '▲ beyond tolerance' }).first().isVisible()).resolves.toBe(true);

    // Acknowledge the alert with a comment; the attention mark clears.
    await page.getByLabel(/Comment/).first().fill('Checked in the browser test.');
    await page.getByRole('button', { name: 'Acknowledge' }).first().click();
    await page.getByText(/no longer marked for attention/).waitFor();
    expect(external).toEqual([]);
    await context.close();
  });

  it('service: exports a batch and receives a zip with the units and a manifest', async () => {
    const context = await browser.newContext({ acceptDownloads: true, viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    await signInPage(page, DEMO.service);
    await page.goto(`${BASE_URL}/exports`);
    await expect(page.locator('[data-safety-caution]').textContent()).resolves.toContain('A parameter set changes where the arm goes.');
    await page.getByLabel(/Filter/).fill(serials[0]!.slice(0, -2));
    await page.getByLabel(`Pick ${serials[0]}`).check();
    await page.getByLabel(`Pick ${serials[4]}`).check();
    const [download] = await Promise.all([page.waitForEvent('download'), page.getByRole('button', { name: /Download batch \(zip\) of 2 units/ }).click()]);
    expect(download.suggestedFilename()).toMatch(/\.zip$/);
    const zip = await JSZip.loadAsync(await readFile((await download.path())!));
    const manifest = JSON.parse(await zip.file('manifest.json')!.async('string'));
    expect(manifest.units.map((u: { serial: string; version: number }) => [u.serial, u.version])).toEqual([[serials[0], 2], [serials[4], 2]]);
    expect(zip.file(`${serials[4]}/robot.urdf`)).not.toBeNull();
    // The log on the page shows the batch.
    await page.locator('[data-export-log] tr', { hasText: `${serials[0]} v2, ${serials[4]} v2` }).first().waitFor();
    // "Pick all that match" picks every unit the server's search matched, not only the page's rows.
    await page.getByRole('button', { name: 'Clear selection' }).click();
    const pager = page.locator('[data-export-pager]');
    const total = Number(/· (\d+) units? matching/.exec((await pager.textContent()) ?? '')?.[1]);
    expect(total).toBeGreaterThanOrEqual(2);
    await page.getByRole('button', { name: `Pick all ${total} units that match` }).click();
    await page.getByRole('button', { name: `Download batch (zip) of ${total} units` }).waitFor();
    await context.close();
  });
});
