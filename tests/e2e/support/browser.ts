import { existsSync, mkdirSync, readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { chromium, type Browser, type BrowserContext, type Page } from 'playwright-core';
import { describe, expect } from 'vitest';

const require = createRequire(import.meta.url);
export const CHROMIUM = process.env.CHROMIUM_PATH ?? '/usr/bin/chromium';
export const hasChromium = existsSync(CHROMIUM);

if (!hasChromium) {
  const message = `\n\n  !!! Browser tests need Debian's Chromium at ${CHROMIUM} (apt-get install -y chromium). ${process.env.CI ? 'CI is set, so they FAIL.' : 'They are SKIPPED on this machine.'} !!!\n\n`;
  console.warn(message);
  if (process.env.CI) throw new Error(message);
}

/** A describe block that runs only where Debian's Chromium exists (and fails under CI without it). */
export const describeInBrowser: typeof describe = describe.skipIf(!hasChromium) as typeof describe;

/**
 * Chromium's own address-bar pop-ups, which this Chromium builds as hidden web pages with every
 * new tab even when headless. A trace of three new tabs had them take 3.0 s of renderer time
 * (1,146 requests for the browser's own chrome:// files) beside the pages under test, on a
 * machine of two cores; no test looks at the address bar, and a phone has no such pages.
 */
const BROWSER_OWN_PAGES_OFF = '--disable-features=WebUIOmniboxPopup,WebUIOmniboxAimPopup';

export async function launchBrowser(): Promise<Browser> {
  // playwright-core starts every browser with a fresh temporary profile (user-data dir) of its own.
  return chromium.launch({
    executablePath: CHROMIUM,
    headless: true,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync', '--no-first-run', '--disable-quic', BROWSER_OWN_PAGES_OFF],
  });
}

export const PHONE = { viewport: { width: 390, height: 844 }, deviceScaleFactor: 2, isMobile: true, hasTouch: true };
export const DESK = { viewport: { width: 1366, height: 900 } };

/** Signs in through the real pages: the app sends the browser to the identity provider's form. */
export async function signInThroughPage(page: Page, baseUrl: string, email: string, path = '/'): Promise<void> {
  await page.goto(new URL(path, baseUrl).href);
  await page.getByLabel('Email').fill(email);
  await page.getByLabel('Password').fill('demo');
  await page.getByRole('button', { name: 'Sign in' }).click();
  await page.waitForURL((url) => !url.pathname.startsWith('/idp') && !url.pathname.startsWith('/auth'));
  await page.locator('h1').first().waitFor();
}

export async function newSignedInPage(browser: Browser, baseUrl: string, email: string, opts: { path?: string; device?: typeof PHONE | typeof DESK } = {}): Promise<{ context: BrowserContext; page: Page }> {
  const context = await browser.newContext({ ...(opts.device ?? DESK), baseURL: baseUrl });
  const page = await context.newPage();
  await signInThroughPage(page, baseUrl, email, opts.path ?? '/');
  return { context, page };
}

const axeSource = readFileSync(require.resolve('axe-core/axe.min.js'), 'utf8');

/** axe-core in the page (evaluated through the browser's protocol, so our strict CSP still holds). */
export async function expectAccessible(page: Page, what: string): Promise<void> {
  // A dialog still fading in has its text blended with the page behind it, which axe measures as
  // too little contrast; let every animation and transition that ends run to its end first.
  await page.evaluate(() =>
    Promise.all(document.getAnimations()
      .filter((a) => a.effect?.getComputedTiming().endTime !== Infinity)
      .map((a) => a.finished.catch(() => undefined))),
  );
  await page.evaluate(axeSource);
  const violations = await page.evaluate(async () => {
    const axe = (window as unknown as { axe: { run(ctx: Document, opts: unknown): Promise<{ violations: Array<{ id: string; impact: string; help: string; nodes: Array<{ target: string[] }> }> }> } }).axe;
    const result = await axe.run(document, { resultTypes: ['violations'] });
    return result.violations.map((v) => ({ id: v.id, impact: v.impact, help: v.help, targets: v.nodes.slice(0, 3).map((n) => n.target.join(' ')) }));
  });
  const serious = violations.filter((v) => v.impact === 'serious' || v.impact === 'critical');
  expect(serious, `${what}: ${JSON.stringify(serious, null, 2)}`).toEqual([]);
}

const shotsDir = join('tests', 'e2e', 'screenshots');
export async function screenshot(page: Page, name: string): Promise<string> {
  mkdirSync(shotsDir, { recursive: true });
  const path = join(shotsDir, `${name}.png`);
  await page.screenshot({ path, fullPage: true });
  return path;
}

/** Console errors and CSP refusals a page produced; a test asserts there were none. */
export function collectPageErrors(page: Page): string[] {
  const errors: string[] = [];
  page.on('console', (msg) => {
    if (msg.type() === 'error') errors.push(msg.text());
  });
  page.on('pageerror', (err) => errors.push(err.message));
  return errors;
}
