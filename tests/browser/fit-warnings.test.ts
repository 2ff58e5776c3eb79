/**
 * The fit page shows the engine's warnings as the report carries them: one item per warning with its
 * severity word, its rule and what to do, plus what the standard errors mean. Screenshots at 390, 768
 * and 1440 px go to tmp/screens (git-ignored); at no width is the section wider than the screen.
 */
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, signInPage, trackExternalRequests } from '../support/browser';
import { BASE_URL, DEMO } from '../support/http';
import { createFixture, testDb, type Fixture } from '../integration/fit-fixtures';

let browser: Browser;
let fx: Fixture;
beforeAll(async () => {
  browser = await launchBrowser();
  // 40 poses (32 fitted after the default hold-out) for about 27 parameters: little redundancy, so the report has excitation warnings to show.
  fx = await createFixture({ count: 40, seed: 67, outlier: true });
});
afterAll(async () => {
  await browser?.close();
  await testDb().$client.end();
});

describe('fit warnings on the fit page', () => {
  it('lists every warning of the report with its rule and advice, at phone, tablet and desktop widths', async () => {
    const ctx = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    const page = await ctx.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, DEMO.engineer);
    await page.goto(`${BASE_URL}/fits/new?session=${fx.sessionId}`);
    await page.getByRole('button', { name: /Run the fit on 40 poses/ }).click();
    await page.waitForURL(/\/fits\/[0-9a-f-]{36}$/, { timeout: 20_000 });
    await page.locator('[data-fit-report][data-fit-state="fitted"]').waitFor({ timeout: 60_000 });
    const id = new URL(page.url()).pathname.split('/').pop()!;
    const api = await page.evaluate(async (u) => (await fetch(u)).json(), `/api/fits/${id}`);
    const warnings = api.fit.report.warnings as { code: string; severity: string; message: string; advice: string }[];
    expect(warnings.length).toBeGreaterThan(0);

    const section = page.locator('[data-fit-warnings]');
    await section.waitFor();
    await expect(section.locator('[data-warning]').count()).resolves.toBe(warnings.length);
    for (const w of warnings) {
      const item = section.locator(`[data-warning="${w.code}"]`).first();
      const text = (await item.textContent()) ?? '';
      expect(text).toContain(w.message.slice(0, 40));
      expect(text).toContain('What to do:');
      expect(text).toMatch(/^(. )?(Serious|Warning|Note):/);
    }
    await expect(section.textContent()).resolves.toMatch(/Rules checked: every joint moves over at least 25 % of its range/);
    await expect(page.locator('[data-uncertainty-note]').textContent()).resolves.toMatch(/conditional on the \d+ parameters? held at nominal/);

    const dir = join(process.cwd(), 'tmp', 'screens');
    mkdirSync(dir, { recursive: true });
    for (const width of [390, 768, 1440]) {
      await page.setViewportSize({ width, height: 1000 });
      await section.scrollIntoViewIfNeeded();
      await section.screenshot({ path: join(dir, `fit-warnings-${width}.png`) });
      // The warnings section never makes the page wider than the screen.
      const wide = await section.evaluate((el) => {
        const w = document.documentElement.clientWidth;
        return [el, ...Array.from(el.querySelectorAll('*'))].filter((e) => e.getBoundingClientRect().right > w + 0.5 || e.scrollWidth > e.clientWidth + 1).map((e) => e.outerHTML.slice(0, 80));
      });
      expect(wide, `wider than ${width} px`).toEqual([]);
    }
    expect(external).toEqual([]);
    await ctx.close();
  }, 180_000);
});
