import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser } from 'playwright-core';
import { startTestServer, type TestServer } from '../support/server';
import { collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, screenshot } from './support/browser';

// An administrator registers a record system in People & places and copies its secret; the system
// sends a pre-alert with a client-credentials token; the charge nurse's board shows where it came from.

describeInBrowser('Exchange in Chromium', () => {
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

  it('registers a machine client, whose pre-alert reaches the board with its source; the API reference opens', async () => {
    const { context, page } = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/people' });
    const errors = collectPageErrors(page);
    await page.getByRole('tab', { name: 'Machine clients' }).click();
    await page.getByRole('heading', { name: 'Register a system' }).waitFor();
    await page.getByLabel('System name').fill('Alderwick care-record system');
    await page.getByRole('combobox', { name: 'Agency' }).click();
    await page.getByRole('option', { name: 'Alderwick County Ambulance Service' }).click();
    await page.getByRole('button', { name: 'Register' }).click();
    await page.getByText('it is shown only this once').waitFor();
    await expectAccessible(page, 'People & places, machine client registered');
    await screenshot(page, 'machine-client-registered');
    const codes = await page.locator('.issued code').allTextContents();
    const [clientId, clientSecret, tokenEndpoint] = codes;
    expect(clientId).toMatch(/^plumbline-mc-/);

    const token = await fetch(tokenEndpoint, {
      method: 'POST',
      headers: { authorization: `Basic ${Buffer.from(`${clientId}:${clientSecret}`).toString('base64')}`, 'content-type': 'application/x-www-form-urlencoded' },
      body: new URLSearchParams({ grant_type: 'client_credentials' }),
    }).then((r) => r.json());
    const hospitalId = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
    // The charge nurse's board is open before the system sends: the pre-alert arrives live.
    const nurse = await newSignedInPage(browser, server.url, 'nurse@plumbline.test', { path: '/board' });
    await nurse.page.locator('article.case-card').first().waitFor();
    // 81-year-old, fall from standing with head impact: moderate risk (low-level fall, age ≥ 65, head impact) [source: Newgard 2022].
    const sent = await fetch(new URL('/api/pre-alerts', server.url), {
      method: 'POST',
      headers: { authorization: `Bearer ${token.access_token}`, 'content-type': 'application/json' },
      body: JSON.stringify({ clientId: randomUUID(), hospitalId, etaMinutes: 8, clinical: { ageYears: 81, sex: 'female', fall: { heightM: 0, surface: 'tile-stone', firstImpact: 'head', headImpact: true }, vitals: { sbp: 150, hr: 78 } } }),
    });
    expect(sent.status).toBe(201);
    const { caseNumber } = await sent.json();

    await page.goto(new URL('/api/docs', server.url).href);
    await page.locator('.opblock-tag').first().waitFor();
    await screenshot(page, 'api-reference');
    expect(await page.getByText('/api/pre-alerts').count()).toBeGreaterThan(0);
    expect(errors).toEqual([]);
    await context.close();

    const card = nurse.page.locator(`article[data-case-number="${caseNumber}"]`);
    await card.getByText('Sent by its record system “Alderwick care-record system”').waitFor({ timeout: 15_000 });
    expect(await card.innerText()).toContain('81-year-old female');
    await expectAccessible(nurse.page, 'Inbound board with a machine client pre-alert');
    await screenshot(nurse.page, 'board-machine-source');
    await nurse.context.close();
  }, 180_000);
});
