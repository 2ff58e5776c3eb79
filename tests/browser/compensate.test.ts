/**
 * An engineer compensates a program in Debian's chromium: unit page → drop zone → job page with statuses,
 * histogram and the table of corrections → safety caution → download, read back with csv-parse. A bad
 * program shows its problems table. Screenshots at 390, 768 and 1440 px go to tmp/ (git-ignored).
 */
import { mkdirSync } from 'node:fs';
import { parse } from 'csv-parse/sync';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { IkSolver } from '../../src/lib/engine/ik';
import { anglesFromRotation } from '../../src/lib/engine/rotations';
import { createDb } from '../../src/lib/server/db';
import { r6Nominal, r6True } from '../engine/make-test-data';
import { approveSet, makeModel, makeUnit } from '../support/approved-sets';
import { islandsHydrated, launchBrowser, signInPage } from '../support/browser';
import { BASE_URL, DEMO } from '../support/http';
import { serviceEnv } from '../support/services';

const db = createDb(serviceEnv().databaseUrl, { max: 2 });
let browser: Browser;
let serial: string;
const calibrated = r6True();
const solver = new IkSolver({ ...calibrated, base: undefined });
// A small drilling pattern: 5 × 4 holes, tool pointing down (rx = 180°).
const program = (() => {
  const lines = ['target,x,y,z,rx,ry,rz'];
  const p0 = solver.pose([0, -20, 30, 0, 60, 0]).position;
  for (let i = 0; i < 5; i++) for (let j = 0; j < 4; j++) {
    const a = anglesFromRotation(solver.pose([0, -20, 30, 0, 60, 0]).rotation);
    lines.push([`HOLE-${i + 1}-${j + 1}`, p0[0] + 20 * i, p0[1] + 20 * j, p0[2], a.rx, a.ry, a.rz].join(','));
  }
  return lines.join('\n') + '\n';
})();

beforeAll(async () => {
  browser = await launchBrowser();
  const m = await makeModel(db, r6Nominal());
  const u = await makeUnit(db, m.revisionId);
  await approveSet(db, { unitId: u.unitId, revisionId: m.revisionId, geometry: calibrated });
  serial = u.serial;
  mkdirSync('tmp/screens', { recursive: true });
});
afterAll(async () => {
  await browser?.close();
  await db.$client.end();
});

describe('program compensation in the browser', () => {
  it('upload → statuses and corrections → caution → download', async () => {
    const context = await browser.newContext({ viewport: { width: 768, height: 1024 }, acceptDownloads: true });
    const page = await context.newPage();
    await signInPage(page, DEMO.engineer);
    await page.goto(`${BASE_URL}/units/${serial}`);
    await Promise.all([page.waitForURL(/\/compensate$/), page.locator('[data-compensate-link]').click()]);
    await islandsHydrated(page);
    // A bad program first: the problems table names the line and field.
    await page.locator('[data-file-input]').setInputFiles({ name: 'bad.csv', mimeType: 'text/csv', buffer: Buffer.from('target,x,y,z\nA,1,2,oops\n') });
    await page.getByRole('button', { name: 'Compensate the program' }).click();
    await page.locator('[data-problems]').waitFor({ timeout: 15_000 });
    const problem = await page.locator('[data-problems] tbody tr').first().textContent();
    expect(problem).toContain('2');
    expect(problem).toContain('z');
    for (const width of [390, 768, 1440]) {
      await page.setViewportSize({ width, height: 1000 });
      await page.screenshot({ path: `tmp/screens/compensate-form-${width}.png`, fullPage: true });
      expect(await page.evaluate(() => document.documentElement.scrollWidth <= window.innerWidth + 1)).toBe(true);
    }
    await page.setViewportSize({ width: 768, height: 1024 });
    await page.locator('[data-file-input]').setInputFiles({ name: 'panel-drill.csv', mimeType: 'text/csv', buffer: Buffer.from(program) });
    await expect(page.locator('[data-chosen-file]').textContent()).resolves.toContain('panel-drill.csv');
    await Promise.all([page.waitForURL(/\/compensations\/[0-9a-f-]{36}$/, { timeout: 30_000 }), page.getByRole('button', { name: 'Compensate the program' }).click()]);
    await page.locator('[data-compensation-state="done"]').waitFor({ timeout: 60_000 });
    expect(await page.locator('[data-status="reached"]').textContent()).toMatch(/20 reached/);
    await page.locator('[data-correction-histogram] .recharts-bar-rectangle').first().waitFor({ timeout: 15_000 });
    expect(await page.locator('[data-largest] tbody tr').count()).toBe(20);
    const firstTwo = await page.locator('[data-largest] tbody tr td:nth-child(3)').allTextContents();
    expect(Number(firstTwo[0])).toBeGreaterThanOrEqual(Number(firstTwo[1]));
    // The download waits for the caution to be read.
    await expect(page.locator('[data-safety-caution]').textContent()).resolves.toMatch(/reduced speed/);
    expect(await page.locator('[data-download]').count()).toBe(0);
    await page.locator('[data-caution-read]').check();
    const [download] = await Promise.all([page.waitForEvent('download'), page.locator('[data-download]').click()]);
    const path = await download.path();
    const { readFileSync } = await import('node:fs');
    const rows = parse(readFileSync(path!, 'utf8'), { columns: true }) as Record<string, string>[];
    expect(rows).toHaveLength(20);
    expect(rows[0].target).toBe('HOLE-1-1');
    expect(rows.every((r) => r.status === 'reached')).toBe(true);
    // Once done, the page shows the program in 3-D: every target in the view's list, drawn as a target.
    await page.reload();
    const view = page.locator('[data-compensation-3d]');
    await view.locator('[data-view3d-list] li').first().waitFor({ timeout: 30_000 });
    expect(await view.locator('[data-view3d-list] li').count()).toBe(20);
    await expect(view.textContent()).resolves.toMatch(/target point/);
    for (const width of [390, 768, 1440]) {
      await page.setViewportSize({ width, height: 1000 });
      await page.screenshot({ path: `tmp/screens/compensation-${width}.png`, fullPage: true });
      // No sideways scrolling.
      expect(await page.evaluate(() => document.documentElement.scrollWidth <= window.innerWidth + 1)).toBe(true);
    }
    await context.close();
  });
});
