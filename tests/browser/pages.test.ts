/**
 * Every page, as every role that may open it, at phone (390 px), tablet (768 px) and desktop (1440 px) widths,
 * in Debian's chromium:
 * - the document is never wider than the window (nothing scrolls sideways; wide tables scroll in their card);
 * - axe-core (WCAG 2.0/2.1/2.2 A and AA rules) finds no violation of impact serious or critical;
 * - buttons, fields and navigation items are at least 44 px tall on the phone;
 * - a full-page screenshot of each lands in tmp/pages/ (git-ignored) for a person to look at.
 *
 * The page list is not written down here: it is every .astro file under src/pages, and the roles for each
 * come from the access table (src/lib/shared/routes.ts), so a new page is crawled as soon as it exists.
 * Route parameters are filled from invented data this file creates (an arm model, a unit, a session, an
 * approved fit and one awaiting review, an invitation); a parameter of a new kind is taken from the links the
 * crawl has seen, and the test fails naming the page when neither knows a value.
 */
import AxeBuilder from '@axe-core/playwright';
import { mkdirSync, readdirSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { pageAccess } from '../../src/lib/shared/routes';
import { ROLES, type Role } from '../../src/lib/shared/roles';
import { createFixture, testDb, type Fixture } from '../integration/fit-fixtures';
import { islandsHydrated, launchBrowser, signInPage } from '../support/browser';
import { BASE_URL, DEMO, signedIn, uniq } from '../support/http';
import { waitForMail } from '../support/services';

const root = fileURLToPath(new URL('../..', import.meta.url));
const SHOTS = path.join(root, 'tmp', 'pages');
const WIDTHS = [390, 768, 1440] as const;
/** axe runs at the phone and the desktop width; the tablet width is checked for overflow and pictured. */
const AXE_WIDTHS = new Set<number>([390, 1440]);
const AXE_TAGS = ['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa', 'wcag22aa'];

type Visitor = Role | 'anonymous';
const EMAIL: Record<Role, string> = { technician: DEMO.technician, engineer: DEMO.engineer, quality: DEMO.quality, service: DEMO.service, admin: DEMO.admin };

/** Every page of the app in file-route form (/units/[serial]/drift), read from src/pages. */
function pageRoutes(dir = path.join(root, 'src', 'pages'), prefix = ''): string[] {
  const out: string[] = [];
  for (const entry of readdirSync(dir, { withFileTypes: true })) {
    if (entry.isDirectory()) {
      if (prefix === '' && entry.name === 'api') continue;
      out.push(...pageRoutes(path.join(dir, entry.name), `${prefix}/${entry.name}`));
    } else if (entry.name.endsWith('.astro')) {
      const name = entry.name.slice(0, -'.astro'.length);
      out.push(name === 'index' ? prefix || '/' : `${prefix}/${name}`);
    }
  }
  return out.sort();
}

const routeRegex = (route: string) =>
  new RegExp('^' + route.split('/').map((s) => (/^\[.+\]$/.test(s) ? '[^/]+' : s.replace(/[.*+?^${}()|\\]/g, '\\$&'))).join('/') + '$');

let browser: Browser;
let fx: Fixture;
let approvedFit: string;
let reviewFit: string;
let inviteToken: string;
let compensationId: string;
/** Same-origin links seen on the pages crawled so far (to fill parameters of pages this file does not know). */
const seenLinks = new Set<string>();

async function waitFitted(client: Awaited<ReturnType<typeof signedIn>>, id: string) {
  for (let i = 0; i < 240; i++) {
    const { body } = await client.json(`/api/fits/${id}`);
    const state = body?.fit?.state ?? body?.state;
    if (state === 'fitted') return;
    if (state === 'failed') throw new Error(`fit ${id} failed: ${JSON.stringify(body).slice(0, 400)}`);
    await new Promise((r) => setTimeout(r, 500));
  }
  throw new Error(`fit ${id} did not finish in 120 s`);
}

beforeAll(async () => {
  browser = await launchBrowser();
  fx = await createFixture({ count: 40, seed: 1907, split: true });
  const engineer = await signedIn(DEMO.engineer);
  const reviewer = await signedIn(DEMO.engineer2);
  const runFit = async () => {
    const res = await engineer.json(`/api/sessions/${fx.sessionId}/fits`, { method: 'POST', json: {} });
    expect(res.status, JSON.stringify(res.body)).toBe(202);
    await waitFitted(engineer, res.body.id);
    return res.body.id as string;
  };
  approvedFit = await runFit();
  expect((await engineer.json(`/api/fits/${approvedFit}/submit`, { method: 'POST', json: {} })).status).toBe(200);
  const approved = await reviewer.json(`/api/fits/${approvedFit}/approve`, { method: 'POST', json: { comment: 'Checked at reduced speed.' } });
  expect(approved.status, JSON.stringify(approved.body)).toBe(200);
  // A compensated program of the unit's approved set (the compensation page needs one, done).
  const form = new FormData();
  form.set('file', new Blob(['target,q1,q2,q3,q4,q5,q6\nT1,0,-20,30,0,45,0\nT2,10,-25,35,5,40,10\nT3,20,-30,40,10,35,20\n'], { type: 'text/csv' }), 'crawl.csv');
  const comp = await engineer.json(`/api/units/${encodeURIComponent(fx.serial)}/compensations`, { method: 'POST', body: form });
  expect(comp.status, JSON.stringify(comp.body)).toBe(202);
  compensationId = comp.body.id;
  for (let i = 0; i < 240 && (await engineer.json(`/api/compensations/${compensationId}`)).body.state !== 'done'; i++) await new Promise((r) => setTimeout(r, 500));
  reviewFit = await runFit();
  expect((await engineer.json(`/api/fits/${reviewFit}/submit`, { method: 'POST', json: { comment: 'Second visit' } })).status).toBe(200);

  const admin = await signedIn(DEMO.admin);
  const email = `${uniq('a11y')}@example.com`.toLowerCase();
  expect((await admin.json('/api/admin/users', { method: 'POST', json: { email, name: 'Invited Person', roles: ['technician'] } })).status).toBe(201);
  const mail = await waitForMail((m) => m.to.toLowerCase().includes(email) && /invited/i.test(m.subject), 20_000);
  inviteToken = /\/invite\/([\w-]+)/.exec(mail.text ?? '')![1]!;
  mkdirSync(SHOTS, { recursive: true });
}, 300_000);

afterAll(async () => {
  await browser?.close();
  await testDb().$client.end();
});

/** A concrete path for a file route, or undefined when no value is known for one of its parameters. */
function concrete(route: string): string | undefined {
  if (route === '/404') return `/no-such-page-${uniq()}`;
  const known: Record<string, string> = {
    '/arm-models/[id]': fx.modelId,
    '/fleet/[modelId]': fx.modelId,
    '/units/[serial]': fx.serial,
    '/sessions/[id]': fx.sessionId,
    '/fits/[id]': reviewFit,
    '/reviews/[id]': reviewFit,
    '/invite/[token]': inviteToken,
    '/compensations/[id]': compensationId,
  };
  const query: Record<string, string> = { '/fits/new': `?session=${fx.sessionId}` };
  const segments = route.split('/');
  let out = '';
  for (let i = 1; i < segments.length; i++) {
    const seg = segments[i]!;
    if (/^\[.+\]$/.test(seg)) {
      const value = known[segments.slice(0, i + 1).join('/')];
      if (value === undefined) {
        const re = routeRegex(route);
        return [...seenLinks].find((href) => re.test(href));
      }
      out += '/' + encodeURIComponent(value);
    } else out += '/' + seg;
  }
  return (out || '/') + (query[route] ?? '');
}

function visitorsOf(pathname: string): Visitor[] {
  if (pathname.startsWith('/no-such-page-')) return ['anonymous', 'technician'];
  const access = pageAccess(pathname);
  if (access === 'public') return ['anonymous'];
  if (access === 'signed-in') return [...ROLES];
  return [...access];
}

interface Problem {
  page: string;
  width: number;
  what: string;
}

/** Scroll through the page so client:visible islands hydrate, then wait for every island. */
async function settle(page: Page) {
  await page.evaluate(async () => {
    for (let y = 0; y < document.documentElement.scrollHeight; y += Math.max(200, innerHeight - 100)) {
      scrollTo(0, y);
      await new Promise((r) => setTimeout(r, 60));
    }
    scrollTo(0, 0);
  });
  await islandsHydrated(page);
  await page.evaluate(() => document.fonts.ready);
  await page.waitForTimeout(250);
}

async function checkPage(page: Page, visitor: Visitor, route: string, target: string): Promise<Problem[]> {
  const problems: Problem[] = [];
  const res = await page.goto(BASE_URL + target);
  const status = res?.status() ?? 0;
  const landed = new URL(page.url()).pathname;
  if (status >= 500) problems.push({ page: target, width: 0, what: `answered ${status}` });
  if (visitor !== 'anonymous' && landed.startsWith('/signin')) problems.push({ page: target, width: 0, what: 'sent a signed-in visitor to the sign-in page' });
  for (const href of await page.locator('a[href^="/"]').evaluateAll((as) => as.map((a) => a.getAttribute('href')!.split(/[?#]/)[0]!))) seenLinks.add(href);
  for (const width of WIDTHS) {
    await page.setViewportSize({ width, height: width < 800 ? 900 : 1000 });
    await settle(page);
    const size = await page.evaluate(() => ({ doc: document.documentElement.scrollWidth, win: document.documentElement.clientWidth }));
    if (size.doc > size.win) {
      const wide = await page.evaluate(() => {
        const W = document.documentElement.clientWidth;
        return Array.from(document.querySelectorAll('body *'))
          .filter((el) => el.getBoundingClientRect().right > W + 1 && el.parentElement!.getBoundingClientRect().right <= W + 1)
          .slice(0, 3)
          .map((el) => `<${el.tagName.toLowerCase()} class="${el.getAttribute('class') ?? ''}"> ${Math.round(el.getBoundingClientRect().width)} px`);
      });
      problems.push({ page: target, width, what: `document is ${size.doc} px wide in a ${size.win} px window; widest: ${wide.join('; ')}` });
    }
    // Every navigation item is on screen, or behind a visible Menu button: never silently cut off.
    const nav = await page.evaluate(() => {
      const links = Array.from(document.querySelectorAll<HTMLElement>('nav[aria-label="Main"] a'));
      const toggle = document.querySelector<HTMLElement>('[data-nav-toggle]');
      const shown = (el: HTMLElement) => {
        const r = el.getBoundingClientRect();
        const box = el.closest('nav')!.getBoundingClientRect();
        return el.offsetParent !== null && r.width > 0 && r.right <= Math.min(innerWidth, box.right) + 1 && r.left >= box.left - 1;
      };
      return { hidden: links.filter((a) => !shown(a)).map((a) => a.textContent!.trim()), menu: !!toggle && !toggle.hidden && toggle.offsetParent !== null };
    });
    if (nav.hidden.length && !nav.menu) problems.push({ page: target, width, what: `navigation items out of sight without a Menu button: ${nav.hidden.join(', ')}` });
    if (width === 390) {
      const small = await page.evaluate(() =>
        Array.from(document.querySelectorAll<HTMLElement>('main button, main .btn, main select, main input:not([type=checkbox]):not([type=radio]):not([type=hidden]):not([type=file]), body > header a, body > header button'))
          .filter((el) => el.offsetParent !== null && !el.closest('.recharts-wrapper'))
          .filter((el) => el.getBoundingClientRect().height < 43.5)
          .slice(0, 5)
          .map((el) => `${el.outerHTML.slice(0, 90)} (${Math.round(el.getBoundingClientRect().height)} px)`),
      );
      for (const s of small) problems.push({ page: target, width, what: `touch target under 44 px: ${s}` });
    }
    if (AXE_WIDTHS.has(width)) {
      const result = await new AxeBuilder({ page }).withTags(AXE_TAGS).options({ resultTypes: ['violations'] }).analyze();
      for (const v of result.violations.filter((x) => x.impact === 'serious' || x.impact === 'critical')) {
        for (const node of v.nodes.slice(0, 5)) {
          problems.push({ page: target, width, what: `axe ${v.impact} ${v.id} (${v.help}) at ${node.target.join(' ')}: ${node.html.slice(0, 160)}${node.failureSummary ? ' — ' + node.failureSummary.replace(/\s+/g, ' ').slice(0, 220) : ''}` });
        }
        if (v.nodes.length > 5) problems.push({ page: target, width, what: `axe ${v.id}: ${v.nodes.length - 5} more elements` });
      }
    }
    const file = `${visitor}${route.replace(/[^\w]+/g, '_')}-${width}.png`;
    await page.screenshot({ path: path.join(SHOTS, file), fullPage: true });
  }
  return problems;
}

const routes = pageRoutes();

describe('every page, as every role that may open it, at 390, 768 and 1440 px', () => {
  it('finds the pages in src/pages', () => {
    // The crawl below is only as good as this list: it must hold the pages every role starts from.
    for (const r of ['/', '/signin', '/units', '/units/[serial]', '/fits/[id]', '/reviews/[id]', '/account']) expect(routes).toContain(r);
  });

  const visitors: Visitor[] = ['anonymous', ...ROLES];
  it.each(visitors.map((v) => [v]))('%s', async (visitor) => {
    const context: BrowserContext = await browser.newContext({ viewport: { width: 1440, height: 1000 } });
    const page = await context.newPage();
    if (visitor !== 'anonymous') await signInPage(page, EMAIL[visitor]);
    const problems: Problem[] = [];
    const unresolved: string[] = [];
    let visited = 0;
    // Static pages first: their links fill the parameters of pages this file has no value for.
    const ordered = [...routes].sort((a, b) => Number(a.includes('[')) - Number(b.includes('[')));
    for (const route of ordered) {
      const target = concrete(route);
      if (!target) {
        unresolved.push(route);
        continue;
      }
      if (!visitorsOf(target.split('?')[0]!).includes(visitor)) continue;
      problems.push(...(await checkPage(page, visitor, route, target)));
      visited++;
    }
    await context.close();
    console.info(`${visitor}: ${visited} pages at ${WIDTHS.join(', ')} px, ${problems.length} problems`);
    expect(unresolved, `no value known for the parameters of ${unresolved.join(', ')}: add one to concrete() in this file`).toEqual([]);
    expect(visited).toBeGreaterThan(0);
    expect(problems.map((p) => `${p.page} @${p.width || '-'}: ${p.what}`)).toEqual([]);
  }, 1_200_000);
});
