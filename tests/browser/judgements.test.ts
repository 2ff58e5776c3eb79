/**
 * Judgements that hold, in Debian's chromium: a session of a different arm uploaded to a unit gives an
 * implausible fit that cannot be submitted without an engineer's written override (which the reviewer
 * sees); the review page of a refit with exclusions tells the whole story.
 */
import { readFileSync } from 'node:fs';
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { armModelRevisions, armModels, units } from '../../src/db/schema';
import type { ArmGeometry } from '../../src/lib/engine/types';
import { islandsHydrated, launchBrowser, signInPage } from '../support/browser';
import { approveSet, moved } from '../support/approved-sets';
import { BASE_URL, DEMO, signedIn, uniq } from '../support/http';
import { nominalTq6 } from '../support/arms';
import { createFixture, testDb, waitForFit } from '../integration/fit-fixtures';

let browser: Browser;
beforeAll(async () => {
  browser = await launchBrowser();
});
afterAll(async () => {
  await browser?.close();
  await testDb().$client.end();
});

const shots = async (page: import('playwright-core').Page, name: string, checkWidth = true) => {
  for (const width of [390, 768, 1440]) {
    await page.setViewportSize({ width, height: 1000 });
    await page.screenshot({ path: `tmp/shots/${name}-${width}.png`, fullPage: true });
    // No page scrolls sideways on a phone.
    if (width === 390 && checkWidth) expect(await page.evaluate(() => document.documentElement.scrollWidth <= window.innerWidth + 1)).toBe(true);
  }
};

describe('plausibility gate in the browser', () => {
  it('a session of a different arm: red verdicts on the session and the fit; submitting needs an engineer override the reviewer sees', async () => {
    const db = testDb();
    const r6 = JSON.parse(readFileSync('test-data/orrin-r6-620-nominal.json', 'utf8')) as ArmGeometry;
    // Another six-axis model with the same joint ranges (a little wider) but other link lengths.
    const other: ArmGeometry = { ...r6, name: 'Other six-axis', joints: r6.joints.map((j, k) => ({ ...j, a: [0, 75, 560, 35, 0, 0][k]!, d: [420, 0, 0, 515, 0, 90][k]!, min: j.min! - 10, max: j.max! + 10 })) };
    const [model] = await db.insert(armModels).values({ name: uniq('OTHER-6-') }).returning();
    const [rev] = await db.insert(armModelRevisions).values({ modelId: model!.id, revision: 1, geometry: other }).returning();
    const serial = uniq('WM-');
    await db.insert(units).values({ serial, modelRevisionId: rev!.id, site: 'Test hall', cell: 'W1' });

    const ctx = await browser.newContext({ viewport: { width: 1280, height: 1000 } });
    const page = await ctx.newPage();
    await signInPage(page, DEMO.technician);
    await page.goto(`${BASE_URL}/sessions/new?unit=${serial}`);
    await page.locator('[data-file-input]').setInputFiles({ name: 'orrin-r6-620-session.csv', mimeType: 'text/csv', buffer: readFileSync('test-data/orrin-r6-620-session.csv') });
    await page.getByLabel('Laser tracker / instrument id').fill('tracker LT-99');
    await Promise.all([page.waitForURL(/\/sessions\/[0-9a-f-]{36}$/, { timeout: 30_000 }), page.getByRole('button', { name: 'Upload session' }).click()]);
    const sessionId = new URL(page.url()).pathname.split('/').pop()!;
    // The pose-set check agrees with the fit's verdict (same rules), before any fit.
    await expect(page.locator('[data-check] [data-verdicts]').getAttribute('data-verdicts')).resolves.toBe('implausible');
    await expect(page.locator('[data-quality-implausible]').count()).resolves.toBe(1);
    await expect(page.locator('[data-check]').textContent()).resolves.not.toContain('✓ Enough, well spread poses');

    await page.goto(`${BASE_URL}/fits/new?session=${sessionId}`);
    await islandsHydrated(page);
    await page.getByRole('button', { name: /Run the fit on \d+ poses/ }).click();
    await page.waitForURL(/\/fits\/[0-9a-f-]{36}$/, { timeout: 20_000 });
    const fitId = new URL(page.url()).pathname.split('/').pop()!;
    await page.locator('[data-fit-report][data-fit-state="fitted"]').waitFor({ timeout: 60_000 });
    const verdicts = page.locator('[data-fit-report] [data-verdicts="implausible"]');
    await verdicts.waitFor({ timeout: 10_000 });
    await expect(verdicts.locator('[data-verdict="parameter-changes"]').textContent()).resolves.toMatch(/J3\.a -9\d\.\d{3} mm/);
    await expect(verdicts.locator('[data-verdict="nominal-error"]').getAttribute('data-level')).resolves.toBe('implausible');
    // A technician cannot submit it at all.
    await expect(page.locator('[data-submit-review]').textContent()).resolves.toContain('Only a metrology engineer can submit it');
    await expect(page.getByRole('button', { name: 'Submit with override' }).isDisabled()).resolves.toBe(true);
    await ctx.close();

    // Nor can anyone through the API without an override.
    const eng = await signedIn(DEMO.engineer);
    const refused = await eng.json(`/api/fits/${fitId}/submit`, { method: 'POST', json: { comment: 'looks fine' } });
    expect(refused.status).toBe(409);
    expect(refused.body.error).toMatch(/implausible/);

    // An engineer writes the override; the button stays disabled until it is long enough.
    const ctx2 = await browser.newContext({ viewport: { width: 1280, height: 1000 } });
    const page2 = await ctx2.newPage();
    await signInPage(page2, DEMO.engineer);
    await page2.goto(`${BASE_URL}/fits/${fitId}`);
    await islandsHydrated(page2);
    const button = page2.getByRole('button', { name: 'Submit with override' });
    await expect(button.isDisabled()).resolves.toBe(true);
    const override = 'Arm was rebuilt with the longer upper arm; model update pending, fit wanted for comparison.';
    await page2.getByLabel(/Override \(required/).fill(override);
    await expect(button.isDisabled()).resolves.toBe(false);
    await button.click();
    await page2.locator('[data-fit-report][data-review-state="awaiting_review"]').waitFor({ timeout: 10_000 });
    // The fit report's own tables are wider than a phone (left to the report's layout work): screenshots only.
    await shots(page2, 'fit-implausible', false);
    await ctx2.close();

    // The reviewer sees the verdicts and the override.
    const ctx3 = await browser.newContext({ viewport: { width: 1280, height: 1000 } });
    const page3 = await ctx3.newPage();
    await signInPage(page3, DEMO.engineer2);
    await page3.goto(`${BASE_URL}/reviews/${fitId}`);
    await expect(page3.locator('[data-review-story] [data-verdicts]').getAttribute('data-verdicts')).resolves.toBe('implausible');
    await expect(page3.locator('[data-override]').textContent()).resolves.toContain(override);
    await ctx3.close();
  }, 240_000);

  it('the review page of a refit with exclusions shows the note, the exclusions, the changed settings and the difference to the current set', async () => {
    const db = testDb();
    const fx = await createFixture({ count: 50, seed: 62, outlier: true });
    // The unit's current set: the nominal with J2.a 0.3 mm longer, with standard errors.
    await approveSet(db, { unitId: fx.unitId, revisionId: fx.revisionId, geometry: moved(nominalTq6(), { 'J2.a': 0.3 }), standardErrors: { 'J2.a': 0.004 } });
    const eng = await signedIn(DEMO.engineer);
    // The first fit uses 5-fold cross-validation and a hold-out: the refit from the page must keep both.
    const started = await eng.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { kFold: 5, holdout: 0.1 } });
    expect(started.status).toBe(202);
    await waitForFit(eng, started.body.id);

    const ctx = await browser.newContext({ viewport: { width: 1280, height: 1000 } });
    const page = await ctx.newPage();
    await signInPage(page, DEMO.engineer);
    await page.goto(`${BASE_URL}/fits/${started.body.id}`);
    await islandsHydrated(page);
    await page.getByLabel('Exclude P007').check();
    await page.getByLabel('Why exclude them (shown to the reviewer)').fill('target bumped during P007');
    await page.getByRole('button', { name: /Fit again without these \(1\)/ }).click();
    await page.waitForURL((u) => /\/fits\/[0-9a-f-]{36}$/.test(u.pathname) && !u.pathname.endsWith(started.body.id), { timeout: 20_000 });
    const refitId = new URL(page.url()).pathname.split('/').pop()!;
    await page.locator('[data-fit-report][data-fit-state="fitted"]').waitFor({ timeout: 60_000 });
    // The page says what the refit kept.
    await page.reload();
    await expect(page.locator('[data-refit-summary]').textContent()).resolves.toMatch(/kept every other setting \(.*kFold 5.*\)/);
    const settings = (await eng.json(`/api/fits/${refitId}`)).body.fit.settings;
    expect(settings).toMatchObject({ kFold: 5, holdout: 0.1, exclude: ['P007'] });

    // A second refit changes a setting (through the API), then the engineer submits it with a note.
    const again = await eng.json(`/api/fits/${refitId}/refit`, { method: 'POST', json: { outlierThreshold: 4, note: 'looser outlier threshold' } });
    expect(again.status).toBe(202);
    await waitForFit(eng, again.body.id);
    await page.goto(`${BASE_URL}/fits/${again.body.id}`);
    await islandsHydrated(page);
    await page.getByLabel('Note for the reviewer (optional)').fill('P007 excluded, threshold 4 agreed with the site');
    await page.getByRole('button', { name: 'Submit for review' }).click();
    await page.locator('[data-fit-report][data-review-state="awaiting_review"]').waitFor({ timeout: 10_000 });
    await ctx.close();

    const ctx2 = await browser.newContext({ viewport: { width: 1280, height: 1000 } });
    const page2 = await ctx2.newPage();
    await signInPage(page2, DEMO.engineer2);
    await page2.goto(`${BASE_URL}/reviews/${again.body.id}`);
    await expect(page2.locator('[data-submit-note]').textContent()).resolves.toContain('P007 excluded, threshold 4 agreed with the site');
    const steps = page2.locator('[data-lineage-step]');
    await expect(steps.count()).resolves.toBe(3);
    await expect(steps.nth(1).locator('[data-added-exclusions]').textContent()).resolves.toMatch(/Excluded P007 \(by .+\): “target bumped during P007”/);
    await expect(steps.nth(2).locator('[data-changed-settings]').textContent()).resolves.toMatch(/outlierThreshold 3 → 4/);
    await expect(steps.nth(1).locator('[data-changed-settings]').textContent()).resolves.toBe('No setting changed from the parent');
    await expect(page2.locator('[data-excluded]').textContent()).resolves.toContain('excluded from this fit: P007');
    // Difference to the current set v1: J2.a changed (about −0.3 mm back toward the truth) with its combined SE.
    const diff = page2.locator('[data-set-difference]');
    await expect(diff.textContent()).resolves.toContain('Against v1');
    await expect(diff.locator('[data-difference-row="J2.a"]').count()).resolves.toBe(1);
    expect(Number(await diff.locator('[data-workspace-max]').textContent().then((t) => t!.replace(' mm', '')))).toBeGreaterThan(0);
    await shots(page2, 'review-story');
    await ctx2.close();
  }, 240_000);
});
