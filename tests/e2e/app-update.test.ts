import { cpSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { brotliCompressSync, gzipSync } from 'node:zlib';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { defaultClientDir } from '../../server/app';
import { startTestServer, type TestServer } from '../support/server';
import { collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, PHONE, screenshot } from './support/browser';

/** The mark the next version's page carries, so the test can tell which version the page runs. */
const NEXT_MARK = '<meta name="plumbline-test-version" content="next" />';

/**
 * Publishes a changed build in place, as a deployment would: a new page, and a new service
 * worker whose precache list names the page's new revision. The brotli and gzip copies the
 * server prefers are made again beside each changed file.
 */
function publishNextVersion(clientDir: string): void {
  const write = (name: string, text: string) => {
    const path = join(clientDir, name);
    writeFileSync(path, text);
    writeFileSync(`${path}.br`, brotliCompressSync(text));
    writeFileSync(`${path}.gz`, gzipSync(text));
  };
  const page = readFileSync(join(clientDir, 'index.html'), 'utf8');
  write('index.html', page.replace('</head>', `${NEXT_MARK}</head>`));
  const worker = readFileSync(join(clientDir, 'sw.js'), 'utf8');
  const next = worker.replace(/(url:\s*"index\.html",\s*revision:\s*")[^"]+"/, '$1next-version"');
  if (next === worker) throw new Error('The service worker has no precache entry for index.html to change.');
  write('sw.js', next);
}

describeInBrowser('a new version of the installed crew app', () => {
  let server: TestServer;
  let browser: Browser;
  let clientDir: string;

  beforeAll(async () => {
    // A copy of the build, so the test can publish a new version without touching dist/client.
    clientDir = mkdtempSync(join(tmpdir(), 'plumbline-client-'));
    cpSync(defaultClientDir, clientDir, { recursive: true });
    server = await startTestServer({}, { clientDir });
    browser = await launchBrowser();
  });

  afterAll(async () => {
    await browser?.close();
    await server?.close();
    if (clientDir) rmSync(clientDir, { recursive: true, force: true });
  });

  /** Which version of the page runs: the one installed first, or the one published after. */
  const version = (page: Page) => page.evaluate(() => (document.querySelector('meta[name="plumbline-test-version"]') ? 'next' : 'installed'));
  /** A mark in this page's memory: it is gone if the page was reloaded. */
  const sameDocument = (page: Page) => page.evaluate(() => (window as unknown as { sameDocument?: boolean }).sameDocument === true);

  it('waits while a pre-alert is half typed, keeps what was typed, and starts once the form is cleared', async () => {
    const { context, page } = await newSignedInPage(browser, server.url, 'paramedic@plumbline.test', { path: '/pre-alert', device: PHONE });
    const errors = collectPageErrors(page);
    await page.evaluate(async () => {
      const registration = await navigator.serviceWorker.ready;
      if (registration.active?.state !== 'activated') await new Promise((r) => registration.active?.addEventListener('statechange', r));
    });
    await page.reload();
    await page.getByRole('heading', { name: 'New pre-alert', level: 1 }).waitFor();
    expect(await page.evaluate(() => navigator.serviceWorker.controller?.state)).toBe('activated');
    expect(await version(page)).toBe('installed');

    // Half typed: an ETA and a note, then the thumb leaves the field (nobody is in a field now).
    await page.locator('#pre-alert-eta').fill('12');
    await page.locator('#pre-alert-notes').fill('Found on the kitchen floor');
    await page.evaluate(() => (document.activeElement as HTMLElement | null)?.blur());
    await page.evaluate(() => ((window as unknown as { sameDocument: boolean }).sameDocument = true));

    // The new version is published; the app's regular look for updates finds it.
    publishNextVersion(clientDir);
    await page.evaluate(async () => {
      const registration = await navigator.serviceWorker.getRegistration();
      await registration!.update();
    });
    const notice = page.getByTestId('app-update');
    await notice.waitFor({ timeout: 30_000 });
    expect(await notice.textContent()).toContain('A new version of Plumbline is ready.');
    const waiting = () => page.evaluate(async () => (await navigator.serviceWorker.getRegistration())?.waiting?.state ?? null);
    expect(await waiting()).toBe('installed');

    // Asked to start now, it refuses while the form is half typed, and says why.
    await page.getByRole('button', { name: 'Start it now' }).click();
    await expect.poll(() => notice.textContent()).toContain('It starts once nothing is half typed or waiting to send.');
    await page.evaluate(() => (document.activeElement as HTMLElement | null)?.blur());
    // The page going out of sight is a quiet moment, except that the form still holds it.
    await page.evaluate(() => {
      Object.defineProperty(document, 'visibilityState', { configurable: true, get: () => 'hidden' });
      document.dispatchEvent(new Event('visibilitychange'));
    });
    // Nothing was applied: the notice's button still offers it, the new worker still waits.
    expect(await page.getByRole('button', { name: 'Start it now' }).isEnabled()).toBe(true);
    expect(await waiting()).toBe('installed');
    expect(await sameDocument(page)).toBe(true);
    expect(await version(page)).toBe('installed');
    expect(await page.locator('#pre-alert-eta').inputValue()).toBe('12');
    expect(await page.locator('#pre-alert-notes').inputValue()).toBe('Found on the kitchen floor');
    await page.evaluate(() => {
      delete (document as unknown as { visibilityState?: string }).visibilityState;
      document.dispatchEvent(new Event('visibilitychange'));
    });
    await expectAccessible(page, 'New pre-alert with a new version waiting');
    await screenshot(page, 'app-update-waiting');

    // The form is cleared: now "Start it now" applies the new version, with one reload.
    await page.getByRole('button', { name: 'Clear form' }).click();
    await page.getByRole('button', { name: 'Start it now' }).click();
    await page.waitForFunction(() => document.querySelector('meta[name="plumbline-test-version"]') !== null, undefined, { timeout: 30_000 });
    await page.getByRole('heading', { name: 'New pre-alert', level: 1 }).waitFor();
    expect(await sameDocument(page)).toBe(false);
    expect(await version(page)).toBe('next');
    expect(await waiting()).toBeNull();
    expect(await page.getByTestId('app-update').count()).toBe(0);
    expect(await page.locator('#pre-alert-eta').inputValue()).toBe('');
    expect(errors).toEqual([]);
    await context.close();
  }, 180_000);
});
