/**
 * Run → review → approve in Debian's chromium: an engineer runs a fit from the page, reads the result,
 * excludes the outlier and fits again, submits; a second engineer approves after reading the safety
 * caution; the unit shows the new parameter set.
 */
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SAFETY_CAUTION } from '../../src/lib/shared/safety';
import { launchBrowser, signInPage, trackExternalRequests } from '../support/browser';
import { BASE_URL, DEMO } from '../support/http';
import { createFixture, testDb, type Fixture } from '../integration/fit-fixtures';

let browser: Browser;
let fx: Fixture;
beforeAll(async () => {
  browser = await launchBrowser();
  fx = await createFixture({ count: 50, seed: 61, outlier: true });
});
afterAll(async () => {
  await browser?.close();
  await testDb().$client.end();
});

describe('fit, review and approval in the browser', () => {
  it('runs, refits without the outlier, submits, and a second engineer approves', async () => {
    const ctx = await browser.newContext({ viewport: { width: 1280, height: 1000 } });
    const page = await ctx.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, DEMO.engineer);

    // Run a fit from the page.
    await page.goto(`${BASE_URL}/fits/new?session=${fx.sessionId}`);
    await page.getByRole('button', { name: /Run the fit on 50 poses/ }).click();
    await page.waitForURL(/\/fits\/[0-9a-f-]{36}$/, { timeout: 20_000 });
    const firstUrl = page.url();
    await page.locator('[data-fit-report][data-fit-state="fitted"]').waitFor({ timeout: 30_000 });
    await expect(page.locator('[data-fit-statistics]').textContent()).resolves.toContain('calibrated (after)');
    await expect(page.locator('[data-parameter-table] [data-parameter="J2.a"]').count()).resolves.toBe(1);
    await expect(page.locator('[data-chart="residuals"] svg').count()).resolves.toBeGreaterThan(0);
    // The numbers behind a chart are one click away.
    await page.locator('[data-chart="residuals"]').locator('..').getByRole('button', { name: 'Show the numbers' }).click();
    await expect(page.getByRole('cell', { name: 'P007', exact: true }).first().isVisible()).resolves.toBe(true);

    // Exclude the bumped pose and fit again; the first fit stays.
    await page.getByLabel('Exclude P007').check();
    await page.getByRole('button', { name: /Fit again without these \(1\)/ }).click();
    await page.waitForURL((u) => /\/fits\/[0-9a-f-]{36}$/.test(u.pathname) && u.href !== firstUrl, { timeout: 20_000 });
    await page.locator('[data-fit-report][data-fit-state="fitted"]').waitFor({ timeout: 30_000 });
    await expect(page.getByText('fitted again from').count()).resolves.toBe(1);
    const refitId = new URL(page.url()).pathname.split('/').pop()!;

    // Submit for review.
    await page.getByLabel('Note for the reviewer (optional)').fill('P007 excluded: target was bumped');
    await page.getByRole('button', { name: 'Submit for review' }).click();
    await page.locator('[data-fit-report][data-review-state="awaiting_review"]').waitFor({ timeout: 10_000 });

    // The runner cannot approve: the four-eyes rule is explained instead.
    await page.goto(`${BASE_URL}/reviews/${refitId}`);
    await expect(page.locator('[data-four-eyes]').textContent()).resolves.toMatch(/Four-eyes rule: you .*ran fit \w+ it was re-run from/);
    await expect(page.getByRole('button', { name: /Approve/ }).count()).resolves.toBe(0);
    expect(external).toEqual([]);
    await ctx.close();

    // A second engineer approves after reading the caution.
    const ctx2 = await browser.newContext({ viewport: { width: 768, height: 1024 } });
    const page2 = await ctx2.newPage();
    await signInPage(page2, DEMO.engineer2);
    await page2.goto(`${BASE_URL}/reviews`);
    await page2.locator(`[data-reviews-table] a[href="/reviews/${refitId}"]`).click();
    await page2.waitForURL(new RegExp(`/reviews/${refitId}$`));
    const approve = page2.getByRole('button', { name: /Approve as the next parameter set/ });
    await approve.waitFor();
    await expect(approve.isDisabled()).resolves.toBe(true);
    await expect(page2.locator('[data-safety-caution]').textContent()).resolves.toContain(SAFETY_CAUTION);
    await page2.getByLabel('I have read this').check();
    await expect(approve.isDisabled()).resolves.toBe(false);
    await approve.click();
    await expect(page2.locator('[data-review-done]').textContent({ timeout: 10_000 })).resolves.toContain(`unit ${fx.serial} now has parameter set v1`);

    // The unit shows the new version.
    await page2.goto(`${BASE_URL}/units/${encodeURIComponent(fx.serial)}`);
    const sets = await page2.locator('[data-unit-parameter-sets] tbody tr').allTextContents();
    expect(sets).toHaveLength(1);
    expect(sets[0]).toContain('v1');
    expect(sets[0]).toContain('current');
    await ctx2.close();
  });
});
