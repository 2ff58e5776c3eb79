/**
 * Charts that read true and pages that print: on a fit with hold-out and excluded poses, tooltips carry units
 * and the pose's role, excluded poses are drawn apart, the settings read as a list, the solver sentence stays
 * inside its card, fit labels are unique to the second; the session's length-against-length views have equal
 * scales; printing the fit, review and unit pages drops navigation and buttons and keeps the charts.
 * PDFs and screenshots go to tmp/screens/ (git-ignored).
 */
import { mkdirSync, readFileSync } from 'node:fs';
import type { Browser, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { launchBrowser, signInPage, SOFTWARE_WEBGL } from '../support/browser';
import { BASE_URL, DEMO, signedIn } from '../support/http';
import { createFixture, testDb, waitForFit, type Fixture } from '../integration/fit-fixtures';

const SHOTS = 'tmp/screens';
let browser: Browser;
let fx: Fixture;
let fitId: string;

beforeAll(async () => {
  mkdirSync(SHOTS, { recursive: true });
  browser = await launchBrowser(SOFTWARE_WEBGL);
  fx = await createFixture({ count: 60, seed: 73, outlier: true });
  const engineer = await signedIn(DEMO.engineer);
  const res = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: { holdout: 0.2, exclude: ['P003', 'P004'] } });
  expect(res.status).toBe(202);
  fitId = res.body.id;
  expect((await waitForFit(engineer, fitId)).fit.state).toBe('fitted');
}, 120_000);
afterAll(async () => {
  await browser?.close();
  await testDb().$client.end();
});

async function engineerPage(width: number): Promise<Page> {
  const ctx = await browser.newContext({ viewport: { width, height: 1000 } });
  const page = await ctx.newPage();
  await signInPage(page, DEMO.engineer);
  return page;
}

describe('charts that read true', () => {
  it('fit page: tooltips with units and role, excluded poses apart, readable settings, wrapped solver line, unique labels', async () => {
    const page = await engineerPage(1440);
    await page.goto(`${BASE_URL}/fits/${fitId}`);
    await page.locator('[data-chart="residuals"] .recharts-bar-rectangle').first().waitFor({ timeout: 20_000 });

    // Settings as a list, not JSON.
    const settings = (await page.locator('[data-fit-settings]').textContent())!;
    expect(settings).toContain('Excluded poses2: P003, P004');
    expect(settings).toMatch(/Hold-out20 % of the pose labels/);
    expect(settings).not.toContain('{');

    // Excluded poses: hollow dashed bars (2 poses × before/after) and ✕ markers (2 poses × 3 axes).
    await expect(page.locator('[data-chart="residuals"] .recharts-bar-rectangle path[stroke-dasharray]').count()).resolves.toBe(4);
    await expect(page.locator('[data-chart="axes"] path[fill="none"][stroke="var(--color-chart-nominal)"]').count()).resolves.toBe(6);

    // Tooltip of an excluded pose's bar (pose 3 in file order) names its role and carries units.
    const bars = page.locator('[data-chart="residuals"] .recharts-bar-rectangle');
    await bars.nth(2).hover();
    const tip = page.locator('[data-chart="residuals"] [data-chart-tooltip]');
    await tip.waitFor({ timeout: 5000 });
    await expect(tip.textContent()).resolves.toMatch(/Pose P003 \(line 4\)excluded pose \(not used by the fit\)Before \(nominal\): \d+\.\d{3} mmAfter \(calibrated\): \d+\.\d{3} mm/);
    // …and a fit pose's tooltip says so too.
    await bars.nth(0).hover();
    await expect(tip.textContent()).resolves.toMatch(/Pose P001 \(line 2\)(fit pose|held-out pose).*mm/);
    // Scatter of the axes: units and role as well.
    // (markers of the three axes overlap; whichever is on top answers)
    await page.locator('[data-chart="axes"] .recharts-scatter-symbol').first().hover({ force: true });
    await expect(page.locator('[data-chart="axes"] [data-chart-tooltip]').textContent()).resolves.toMatch(/Pose P\d{3} \(line \d+\).*pose.*Residual [xyz]: -?\d+\.\d{3} mm/);

    // The solver sentence wraps inside the observability card.
    const solver = await page.locator('[data-solver]').evaluate((td) => {
      const card = td.closest('section')!.getBoundingClientRect();
      return { right: td.getBoundingClientRect().right, card: card.right, ws: getComputedStyle(td).whiteSpace };
    });
    expect(solver.ws).toBe('normal');
    expect(solver.right).toBeLessThanOrEqual(solver.card);

    // Fit labels to the second with a short id, in the list and on the unit page.
    await page.goto(`${BASE_URL}/fits?session=${fx.sessionId}`);
    await expect(page.locator(`[data-fits-table] a[href="/fits/${fitId}"]`).textContent()).resolves.toMatch(new RegExp(`^\\d{4}-\\d{2}-\\d{2} \\d{2}:\\d{2}:\\d{2} UTC #${fitId.slice(0, 6)}$`));
    await page.context().close();
  }, 120_000);

  it('session page: the top and side views have equal scales on both axes', async () => {
    for (const width of [390, 1440]) {
      const page = await engineerPage(width);
      await page.goto(`${BASE_URL}/sessions/${fx.sessionId}`);
      const figs = page.locator('[data-chart="points"] [data-equal-scale]');
      await figs.first().locator('.recharts-scatter-symbol').first().waitFor({ timeout: 20_000 });
      for (let k = 0; k < 2; k++) {
        const scale = await figs.nth(k).evaluate((el) => {
          const per = (axis: string, coord: 'x' | 'y') => {
            const ticks = [...el.querySelectorAll(`.recharts-${axis}-tick-labels .recharts-cartesian-axis-tick-value, .recharts-${axis} .recharts-cartesian-axis-tick-value`)] as SVGTextElement[];
            const first = ticks[0]!, last = ticks[ticks.length - 1]!;
            const pos = (t: SVGTextElement) => Number(t.getAttribute(coord));
            return Math.abs(Number(last.textContent) - Number(first.textContent)) / Math.abs(pos(last) - pos(first));
          };
          return { x: per('xAxis', 'x'), y: per('yAxis', 'y') };
        });
        expect(scale.x).toBeGreaterThan(0);
        expect(Math.abs(scale.x / scale.y - 1)).toBeLessThan(0.02); // mm per pixel, across vs up
      }
      await page.locator('[data-chart="points"]').screenshot({ path: `${SHOTS}/session-points-${width}.png` });
      await page.context().close();
    }
  }, 120_000);
});

describe('print', () => {
  it('prints the fit, review and unit pages without navigation or buttons, charts kept', async () => {
    const page = await engineerPage(1280);
    for (const [name, path, chart] of [
      ['fit', `/fits/${fitId}`, '[data-chart="residuals"] svg'],
      ['review', `/reviews/${fitId}`, 'main table'],
      ['unit', `/units/${encodeURIComponent(fx.serial)}`, 'main table'],
    ] as const) {
      await page.goto(`${BASE_URL}${path}`);
      await page.locator(chart).first().waitFor({ timeout: 20_000 });
      await page.emulateMedia({ media: 'print' });
      const seen = await page.evaluate(() => {
        const shown = (el: Element) => { const r = el.getBoundingClientRect(); return getComputedStyle(el).display !== 'none' && r.width > 0 && r.height > 0; };
        return {
          nav: [...document.querySelectorAll('nav, body > header, body > footer')].filter(shown).length,
          buttons: [...document.querySelectorAll('button, a.btn, select, input')].filter(shown).length,
          // The charts' own drawing surfaces (not the legend icons), at a readable size.
          charts: [...document.querySelectorAll('[data-chart] .recharts-wrapper > svg.recharts-surface')].filter((el) => shown(el) && el.getBoundingClientRect().width > 200).length,
        };
      });
      const pdf = await page.pdf({ path: `${SHOTS}/print-${name}.pdf`, format: 'A4', printBackground: true });
      expect(seen.nav, name).toBe(0);
      expect(seen.buttons, name).toBe(0);
      if (name === 'fit') expect(seen.charts).toBeGreaterThanOrEqual(3);
      const pages = (readFileSync(`${SHOTS}/print-${name}.pdf`, 'latin1').match(/\/Type\s*\/Page[^s]/g) ?? []).length;
      expect(pdf.length).toBeGreaterThan(1000);
      expect(pages, name).toBeGreaterThan(0);
      console.log(`print ${name}: ${pages} A4 pages`);
      await page.emulateMedia({ media: 'screen' });
    }
    await page.context().close();
  }, 120_000);
});
