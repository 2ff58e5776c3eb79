/**
 * In a real browser: an engineer imports a geometry file into the arm model form, sees a typo flagged beside
 * its field and the sketch follow the rows, saves; a technician registers a unit on it, makes a pose plan
 * and sorts the unit list (server-side).
 */
import type { Browser } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, signInPage, trackExternalRequests } from '../support/browser';
import { BASE_URL, DEMO, uniq } from '../support/http';

// vitest's expect.poll gives up after 1 s; a server round trip under the parallel suite can take longer.
const POLL = { timeout: 15_000 };

let browser: Browser;
beforeAll(async () => {
  browser = await launchBrowser();
});
afterAll(async () => {
  await browser?.close();
});

describe('arm model form, unit registration, pose plan, unit list', () => {
  it('goes from a geometry file to a unit with a pose plan', async () => {
    const name = uniq('BROWSER-ARM-');
    const serial = uniq('BR-');
    const eng = await browser.newContext({ viewport: { width: 1280, height: 1000 } });
    const page = await eng.newPage();
    const external = trackExternalRequests(page);
    await signInPage(page, DEMO.engineer);
    await page.goto(`${BASE_URL}/arm-models/new`);
    await page.locator('[data-arm-model-form][data-hydrated="true"]').waitFor();

    await page.locator('[data-import-input]').setInputFiles('test-data/orrin-r6-620-nominal.json');
    await page.getByText('Read orrin-r6-620-nominal.json: 6 joints, modified DH').waitFor();
    expect(await page.locator('[data-joint-row]').count()).toBe(6);
    await page.locator('input[name="name"]').fill(name);

    // The sketch is drawn from the rows: the tool point moves when a3 changes (in the zero pose of this arm
    // link 3 stands upright, so its length shows in z).
    const toolZ = () => page.locator('[data-chain-table] tbody tr').last().locator('td').nth(3).textContent();
    const before = Number(await toolZ());
    await page.locator('[data-field="joints[2].a"]').fill('520');
    await expect.poll(async () => Number(await toolZ()) - before, POLL).toBeCloseTo(50, 6);

    // A typo is flagged beside its field and the save is refused until it is fixed.
    await page.locator('[data-field="joints[1].alpha"]').fill('-9O');
    await page.locator('[data-field="joints[1].alpha"]').blur();
    const alphaCell = page.locator('[data-joint-row="1"] td').nth(4);
    await expect.poll(() => alphaCell.textContent(), POLL).toContain('alpha (deg) must be a number');
    await page.getByRole('button', { name: 'Create arm model' }).click();
    expect(new URL(page.url()).pathname).toBe('/arm-models/new');
    await page.locator('[data-field="joints[1].alpha"]').fill('-90');
    await Promise.all([page.waitForURL(/\/arm-models\/[0-9a-f-]{36}$/), page.getByRole('button', { name: 'Create arm model' }).click()]);
    const rows = await page.locator('[data-joint-table] tbody tr').count();
    expect(rows).toBe(6);
    expect(await page.locator('[data-joint-table] tbody tr').nth(2).locator('td').nth(3).textContent()).toBe('520.000');
    expect(external).toEqual([]);
    await eng.close();

    const tech = await browser.newContext({ viewport: { width: 768, height: 1024 } });
    const tp = await tech.newPage();
    await signInPage(tp, DEMO.technician);
    await tp.goto(`${BASE_URL}/units/new`);
    await tp.locator('[data-unit-form][data-hydrated="true"]').waitFor();
    await tp.locator('input[name="serial"]').fill(serial);
    await tp.locator('select[name="modelId"]').selectOption({ label: name });
    await tp.locator('input[name="site"]').fill('Browser hall');
    await Promise.all([tp.waitForURL(`${BASE_URL}/units/${serial}`), tp.getByRole('button', { name: 'Register unit' }).click()]);
    expect(await tp.locator('[data-unit-serial]').textContent()).toBe(serial);

    // Registering the same serial again says so beside the field.
    await tp.goto(`${BASE_URL}/units/new`);
    await tp.locator('[data-unit-form][data-hydrated="true"]').waitFor();
    await tp.locator('input[name="serial"]').fill(serial);
    await tp.getByRole('button', { name: 'Register unit' }).click();
    await tp.getByText(`A unit with serial number ${serial} is already registered.`).waitFor();

    await tp.goto(`${BASE_URL}/units/${serial}`);
    const plan = tp.locator('[data-pose-plan][data-hydrated="true"]');
    await plan.scrollIntoViewIfNeeded();
    await plan.waitFor();
    await plan.locator('input[name="count"]').fill('8');
    await plan.getByRole('button', { name: 'Make plan' }).click();
    await tp.locator('[data-plan-quality]').waitFor({ timeout: 30_000 });
    expect(await tp.locator('[data-plan-quality]').textContent()).toContain('Observability index O1');
    const href = await tp.locator('[data-plan-download]').getAttribute('href');
    expect(href).toBe(`/api/units/${serial}/pose-plan?count=8&seed=1&format=csv`);
    const [download] = await Promise.all([tp.waitForEvent('download'), tp.locator('[data-plan-download]').click()]);
    expect(download.suggestedFilename()).toBe(`pose-plan-${serial}-n8-seed1.csv`);

    // Too many poses: the server's reason is shown.
    await plan.locator('input[name="count"]').fill('900');
    await plan.getByRole('button', { name: 'Make plan' }).click();
    await tp.getByText('count must be at most 500').waitFor();
    await tech.close();
  });

  it('sorts and pages the unit list on the server', async () => {
    const tag = uniq('LS');
    const ctx = await browser.newContext();
    const page = await ctx.newPage();
    await signInPage(page, DEMO.engineer);
    // Three units on a fresh model, registered through the API with the page's own cookies.
    const modelName = uniq('LIST-ARM-');
    const geometry = await (await import('node:fs/promises')).readFile('test-data/orrin-s4-410-nominal.json', 'utf8');
    const created = await page.request.post(`${BASE_URL}/api/arm-models`, { data: { name: modelName, geometry: { ...JSON.parse(geometry), name: modelName } }, headers: { origin: BASE_URL } });
    expect(created.status()).toBe(201);
    const modelId = (await created.json()).id;
    for (const n of [1, 2, 3]) {
      const r = await page.request.post(`${BASE_URL}/api/units`, { data: { serial: `${tag}-${n}`, modelId }, headers: { origin: BASE_URL } });
      expect(r.status()).toBe(201);
    }
    await page.goto(`${BASE_URL}/units?q=${tag}&pageSize=10`);
    await page.locator('[data-units-table][data-hydrated="true"]').waitFor();
    const serials = () => page.locator('[data-unit-row]').evaluateAll((rs) => rs.map((r) => r.getAttribute('data-unit-row')));
    expect(await serials()).toEqual([`${tag}-1`, `${tag}-2`, `${tag}-3`]);
    await page.locator('[data-sort="serial"]').click();
    await expect.poll(serials, POLL).toEqual([`${tag}-3`, `${tag}-2`, `${tag}-1`]);
    expect(new URL(page.url()).searchParams.get('dir')).toBe('desc');
    await page.locator('[data-units-search]').fill(`${tag}-2`);
    await expect.poll(serials, POLL).toEqual([`${tag}-2`]);
    expect(await page.locator('[data-units-count]').textContent()).toBe('1–1 of 1');
    await ctx.close();
  });
});
