/**
 * The 3-D view in Debian's chromium (software WebGL): on a fit it draws, turns when dragged, highlights the
 * pose chosen in the list and draws the arm there, gives excluded poses their own marker shape, falls back to
 * plain text without WebGL, and its three.js code is fetched only by pages that show it. Screenshots at 390,
 * 768 and 1440 px go to tmp/screens/ (git-ignored) for a person to look at.
 */
import { mkdirSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, signInPage, SOFTWARE_WEBGL, trackExternalRequests } from '../support/browser';
import { BASE_URL, DEMO, signedIn } from '../support/http';
import { createFixture, testDb, waitForFit, type Fixture } from '../integration/fit-fixtures';

const SHOTS = 'tmp/screens';
let browser: Browser;
let fx: Fixture;
let fitId: string;
let reportPoses: { label: string; role: string; outlier: boolean }[];

beforeAll(async () => {
  mkdirSync(SHOTS, { recursive: true });
  browser = await launchBrowser(SOFTWARE_WEBGL);
  fx = await createFixture({ count: 80, seed: 71, outlier: true });
  const engineer = await signedIn(DEMO.engineer);
  const res = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { holdout: 0.2, exclude: ['P003', 'P004'] } });
  expect(res.status).toBe(202);
  fitId = res.body.id;
  const done = await waitForFit(engineer, fitId);
  expect(done.fit.state).toBe('fitted');
  reportPoses = (await engineer.json(`/api/fits/${fitId}/poses?pageSize=1000`)).body.poses;
}, 120_000);
afterAll(async () => {
  await browser?.close();
  await testDb().$client.end();
});

/** A coarse grey-level sample of the canvas (64 × 64) and how many pixels are not background white. */
async function canvasSample(page: Page): Promise<{ grid: number[]; inked: number }> {
  return page.locator('[data-view3d] canvas').evaluate(async (c: HTMLCanvasElement) => {
    const img = new Image();
    img.src = c.toDataURL('image/png');
    await img.decode();
    const s = document.createElement('canvas');
    s.width = 64;
    s.height = 64;
    const ctx = s.getContext('2d')!;
    ctx.drawImage(img, 0, 0, 64, 64);
    const d = ctx.getImageData(0, 0, 64, 64).data;
    const grid: number[] = [];
    let inked = 0;
    for (let k = 0; k < d.length; k += 4) {
      const g = Math.round((d[k]! + d[k + 1]! + d[k + 2]!) / 3);
      grid.push(g);
      if (g < 245) inked++;
    }
    return { grid, inked };
  });
}
const changed = (a: number[], b: number[]) => a.filter((v, i) => Math.abs(v - b[i]!) > 8).length;

async function openView(page: Page, path: string) {
  await page.goto(`${BASE_URL}${path}`);
  // client:visible: the island hydrates once it scrolls into sight.
  const view = page.locator('[data-view3d]');
  await view.scrollIntoViewIfNeeded();
  await page.locator('[data-view3d][data-ready="true"]').waitFor({ timeout: 30_000 });
  // One more frame so the canvas holds the drawn scene.
  await page.evaluate(() => new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r))));
  return view;
}

describe('3-D view', () => {
  it('draws a fit, turns, highlights the chosen pose and shapes excluded poses apart', async () => {
    const ctx = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    const page = await ctx.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, DEMO.engineer);
    const view = await openView(page, `/fits/${fitId}`);
    await expect(view.getAttribute('data-webgl')).resolves.toBe('yes');

    const first = await canvasSample(page);
    expect(first.inked).toBeGreaterThan(100); // of 4096 samples: grid, arm, points; a blank canvas has none

    // Turn the view by dragging across the canvas: the picture changes.
    const box = (await page.locator('[data-view3d] canvas').boundingBox())!;
    await page.mouse.move(box.x + box.width / 2, box.y + box.height / 2);
    await page.mouse.down();
    await page.mouse.move(box.x + box.width / 2 + 180, box.y + box.height / 2 + 40, { steps: 8 });
    await page.mouse.up();
    await page.evaluate(() => new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r))));
    const turned = await canvasSample(page);
    expect(changed(first.grid, turned.grid)).toBeGreaterThan(40);

    // Reset brings the first picture back.
    await page.locator('[data-view3d-reset]').click();
    await page.evaluate(() => new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r))));
    const reset = await canvasSample(page);
    expect(changed(first.grid, reset.grid)).toBeLessThan(changed(first.grid, turned.grid));

    // Choosing a pose in the list moves the highlight and the arm to it.
    const before = (await view.getAttribute('data-highlight'))!;
    const target = before === 'P020' ? 'P021' : 'P020';
    const item = page.locator(`[data-view3d-list] [data-pose-label="${target}"]`);
    await item.click();
    await expect(item.getAttribute('aria-pressed')).resolves.toBe('true');
    await page.locator(`[data-view3d][data-highlight="${target}"][data-arm-at="${target}"]`).waitFor({ timeout: 10_000 });
    await expect(page.locator('[data-view3d-chosen]').textContent()).resolves.toContain(target);
    await page.evaluate(() => new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r))));
    const picked = await canvasSample(page);
    expect(changed(reset.grid, picked.grid)).toBeGreaterThan(10);

    // Roles: excluded poses are in the list with their own shape, and the scene draws them with another geometry.
    const excluded = page.locator('[data-view3d-list] [data-role="excluded"]');
    await expect(excluded.count()).resolves.toBe(2);
    await expect(excluded.first().getAttribute('data-shape')).resolves.toBe('cross');
    await expect(page.locator('[data-view3d-list] [data-role="fit"]').first().getAttribute('data-shape')).resolves.toBe('sphere');
    await expect(page.locator('[data-view3d-list] [data-role="holdout"]').count()).resolves.toBeGreaterThan(0);
    // Every flagged fit pose is listed as an outlier (P007 carries a 1.5 mm bump unless it fell into the hold-out).
    const flagged = reportPoses.filter((p) => p.role === 'fit' && p.outlier).map((p) => p.label);
    const p007 = reportPoses.find((p) => p.label === 'P007')!;
    if (p007.role === 'fit') expect(flagged).toContain('P007');
    for (const label of flagged) await expect(page.locator(`[data-view3d-list] [data-pose-label="${label}"]`).getAttribute('data-role')).resolves.toBe('outlier');
    const shapes = JSON.parse((await view.getAttribute('data-shapes'))!) as Record<string, { geometry: string; vertices: number; count: number }>;
    expect(shapes.excluded!.count).toBe(2);
    expect(shapes.excluded!.geometry).toBe('cross');
    expect(shapes.excluded!.geometry).not.toBe(shapes.fit!.geometry);
    expect(shapes.holdout!.geometry).not.toBe(shapes.fit!.geometry);
    if (flagged.length) expect(shapes.outlier!.geometry).not.toBe(shapes.fit!.geometry);
    await expect(page.locator('[data-legend="excluded"]').textContent()).resolves.toMatch(/excluded pose.*cross, 2/);
    // The magnification is stated beside the view and on the scale bar.
    await expect(view.textContent()).resolves.toMatch(/magnified ×\d+/);
    expect(external).toEqual([]);
    await ctx.close();
  }, 120_000);

  it('fits every width and is photographed at 390, 768 and 1440 px', async () => {
    for (const width of [390, 768, 1440]) {
      const ctx = await browser.newContext({ viewport: { width, height: 900 } });
      const page = await ctx.newPage();
      await signInPage(page, DEMO.engineer);
      const view = await openView(page, `/fits/${fitId}`);
      const w = await view.evaluate((el) => ({ el: el.getBoundingClientRect().right, win: window.innerWidth }));
      expect(w.el).toBeLessThanOrEqual(w.win);
      await view.screenshot({ path: `${SHOTS}/view3d-fit-${width}.png` });
      await page.screenshot({ path: `${SHOTS}/fit-page-${width}.png`, fullPage: true });
      // The session page shows the measured points and the nominal model's error.
      const sview = await openView(page, `/sessions/${fx.sessionId}`);
      await expect(page.locator('[data-view3d-list] [data-role="measured"]').count()).resolves.toBe(80);
      await sview.screenshot({ path: `${SHOTS}/view3d-session-${width}.png` });
      await ctx.close();
    }
  }, 180_000);

  it('shows a pose plan in 3-D with the arm at the planned joints', async () => {
    const ctx = await browser.newContext({ viewport: { width: 768, height: 1000 } });
    const page = await ctx.newPage();
    await signInPage(page, DEMO.engineer);
    await page.goto(`${BASE_URL}/units/${encodeURIComponent(fx.serial)}`);
    await page.locator('[data-pose-plan][data-hydrated="true"]').waitFor();
    await page.getByLabel('Poses (6–500)').fill('24');
    await page.getByRole('button', { name: 'Make plan' }).click();
    const view = page.locator('[data-pose-plan] [data-view3d]');
    await view.waitFor({ timeout: 20_000 });
    await view.scrollIntoViewIfNeeded();
    await page.locator('[data-view3d][data-ready="true"]').waitFor({ timeout: 30_000 });
    await expect(page.locator('[data-view3d-list] [data-role="planned"]').count()).resolves.toBe(24);
    await expect(view.getAttribute('data-arm-at')).resolves.toBe('P01');
    await page.locator('[data-view3d-list] [data-pose-label="P05"]').click();
    await page.locator('[data-view3d][data-arm-at="P05"]').waitFor({ timeout: 10_000 });
    await view.screenshot({ path: `${SHOTS}/view3d-plan-768.png` });
    await ctx.close();
  }, 120_000);

  it('loads three.js only on pages that show the view, and falls back to text without WebGL', async () => {
    const plain = await launchBrowser(['--disable-webgl', '--disable-3d-apis']);
    try {
      const ctx = await plain.newContext({ viewport: { width: 1024, height: 900 } });
      const page = await ctx.newPage();
      const threeScripts: string[] = [];
      page.on('response', async (res) => {
        if (!res.url().endsWith('.js')) return;
        const body = await res.text().catch(() => '');
        if (body.includes('WebGLRenderer')) threeScripts.push(new URL(res.url()).pathname);
      });
      await signInPage(page, DEMO.engineer);
      await page.goto(`${BASE_URL}/fits`);
      await page.waitForLoadState('networkidle');
      expect(threeScripts).toEqual([]);

      await page.goto(`${BASE_URL}/fits/${fitId}`);
      const view = page.locator('[data-view3d]');
      await view.scrollIntoViewIfNeeded();
      await page.locator('[data-view3d][data-webgl="no"]').waitFor({ timeout: 20_000 });
      await expect(page.locator('[data-view3d-fallback]').textContent()).resolves.toContain('no WebGL');
      // The list still works without the drawing.
      await page.locator('[data-view3d-list] [data-pose-label="P010"]').click();
      await expect(page.locator('[data-view3d-chosen]').textContent()).resolves.toContain('P010');
      await ctx.close();
    } finally {
      await plain.close();
    }
  }, 120_000);
});
