import { chromium, type Browser, type Page } from 'playwright-core';
import { BASE_URL, DEMO_PASSWORD } from './http';

/**
 * Debian's chromium driven by playwright-core (never a downloaded browser). The flags keep Chromium from
 * reaching for the network, which this machine does not have (stack-notes). playwright gives every launch a
 * fresh, empty profile of its own.
 */
export async function launchBrowser(extraArgs: string[] = []): Promise<Browser> {
  return chromium.launch({
    executablePath: process.env.CHROMIUM_PATH ?? '/usr/bin/chromium',
    headless: true,
    args: [
      '--no-sandbox',
      '--disable-gpu',
      '--disable-quic',
      '--disable-background-networking',
      '--disable-component-update',
      '--disable-sync',
      '--no-first-run',
      ...extraArgs,
    ],
  });
}

/**
 * WebGL in headless Debian chromium (156): with the flags above it already draws through ANGLE on SwiftShader
 * (the renderer string reads "ANGLE (Google, Vulkan 1.3.0 (SwiftShader Device (Subzero)…))"); these flags ask
 * for that explicitly, so a build that stops falling back to software WebGL on its own still draws.
 */
export const SOFTWARE_WEBGL = ['--use-angle=swiftshader', '--enable-unsafe-swiftshader'];

/** Record every request a page makes that leaves 127.0.0.1 (there must be none). */
export function trackExternalRequests(page: Page): string[] {
  const external: string[] = [];
  page.on('request', (req) => {
    const url = new URL(req.url());
    if (!['127.0.0.1', 'localhost'].includes(url.hostname) && !['data:', 'blob:'].includes(url.protocol)) external.push(req.url());
  });
  return external;
}

export async function signInPage(page: Page, email: string, password = DEMO_PASSWORD) {
  await page.goto(`${BASE_URL}/signin`);
  await page.getByLabel('E-mail').fill(email);
  await page.getByLabel('Password').fill(password);
  await Promise.all([page.waitForURL((u) => !u.pathname.startsWith('/signin'), { timeout: 20_000 }), page.getByRole('button', { name: 'Sign in' }).click()]);
}

/**
 * Wait until every island the page hydrates at load is hydrated (Astro drops the `ssr` attribute when one
 * is). Islands mounted with client:visible (the 3-D view) hydrate only when scrolled into view, so they are
 * not waited for here.
 */
export async function islandsHydrated(page: Page, timeout = 20_000) {
  await page.waitForFunction(() => document.querySelectorAll('astro-island[ssr]:not([client="visible"])').length === 0, undefined, { timeout });
}
