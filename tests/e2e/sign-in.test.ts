import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser } from 'playwright-core';
import { startTestServer, type TestServer } from '../support/server';
import { collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, screenshot } from './support/browser';

const homes = [
  { email: 'paramedic@plumbline.test', path: '/pre-alert', heading: 'New pre-alert' },
  { email: 'nurse@plumbline.test', path: '/board', heading: 'Inbound board' },
  { email: 'lead@plumbline.test', path: '/review', heading: 'Activation review' },
  { email: 'quality@plumbline.test', path: '/quality', heading: 'Triage quality' },
  { email: 'admin@plumbline.test', path: '/people', heading: 'People & places' },
];

describeInBrowser('signing in as each role in Chromium', () => {
  let server: TestServer;
  let browser: Browser;
  beforeAll(async () => {
    server = await startTestServer();
    browser = await launchBrowser();
  });
  afterAll(async () => {
    await browser?.close();
    await server?.close();
  });

  it('the sign-in page is our own, labelled and accessible', async () => {
    const context = await browser.newContext();
    const page = await context.newPage();
    await page.goto(`${server.url}/board`);
    // The client loads, finds no session and sends the browser to sign in: wait for that, however busy the machine.
    await expect.poll(() => new URL(page.url()).pathname, { timeout: 15_000 }).toMatch(/^\/idp\/interaction\//);
    expect(await page.locator('h1').textContent()).toBe('Sign in');
    expect(await page.getByLabel('Email').count()).toBe(1);
    expect(await page.getByLabel('Password').count()).toBe(1);
    await expectAccessible(page, 'sign-in page');
    await screenshot(page, 'sign-in');
    await context.close();
  });

  it.each(homes)('$email lands on $heading, passes axe, and signs out', async ({ email, path, heading }) => {
    const { context, page } = await newSignedInPage(browser, server.url, email);
    const errors = collectPageErrors(page);
    expect(new URL(page.url()).pathname).toBe(path);
    await expect.poll(() => page.locator('h1').first().textContent()).toBe(heading);
    await expectAccessible(page, heading);
    await screenshot(page, `home-${path.slice(1)}`);
    await page.getByRole('button', { name: 'Sign out' }).first().click();
    await page.waitForURL(`${server.url}/signed-out`);
    await expect.poll(() => page.locator('h1').first().textContent()).toBe('You are signed out');
    await expectAccessible(page, 'signed out');
    const me = await page.request.get(`${server.url}/api/me`);
    expect(me.status()).toBe(401);
    expect(errors.filter((e) => !/401|Unauthorized/.test(e))).toEqual([]);
    await context.close();
  });
});
