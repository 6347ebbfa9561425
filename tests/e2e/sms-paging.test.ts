import { randomUUID } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import type { CaseSummary } from '../../shared/schemas/cases';
import type { PagingPlan } from '../../shared/schemas/paging';
import { loadConfig } from '../../server/config';
import { startServer, type RunningServer } from '../../server/server';
import { browserlessClient, signIn } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';
import { DESK, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, screenshot } from './support/browser';

// The whole loop on one machine: the administrator gives the trauma lead a mobile number, the
// nurse pages from the board, the local SMS service's page shows the text, a tester answers "1"
// there as the lead's phone, and the nurse's card shows the lead on the way.

// From the Australian range set aside for fiction (ACMA; from memory): nobody's phone.
const LEAD_MOBILE = '+61491570156';

describeInBrowser('SMS paging in Chromium', () => {
  const dataDir = mkdtempSync(join(tmpdir(), 'plumbline-e2e-sms-'));
  let server: RunningServer;
  let browser: Browser;
  let nurse: { context: BrowserContext; page: Page };
  let crew: TestSocket;
  let summary: CaseSummary;
  let adminCookies: Array<{ name: string; value: string }>;

  beforeAll(async () => {
    const config = loadConfig({ NODE_ENV: 'test' }, { port: 0, host: '127.0.0.1', dataDir, logLevel: 'silent' });
    server = await startServer(config, { backgroundJobs: false });
    browser = await launchBrowser();
    crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
  });
  afterAll(async () => {
    crew?.close();
    await browser?.close();
    await server?.close();
    rmSync(dataDir, { recursive: true, force: true });
  });

  it('the administrator gives the trauma lead a mobile number on the Paging tab, next to the caution', async () => {
    const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/people', device: DESK });
    const page = admin.page;
    await page.getByRole('tab', { name: 'Paging' }).click();
    await page.getByText('This paging adds to the hospital\'s own paging system; it does not replace it.', { exact: false }).waitFor();
    const form = page.getByRole('form', { name: 'Paging contacts, Dr. Sasha Imbert' });
    await form.getByLabel('Mobile (E.164)').fill('0491 570 156');
    await form.getByRole('button', { name: 'Save' }).click();
    await expect.poll(() => form.getByRole('alert').textContent()).toContain('is not a number in E.164 form');
    await form.getByLabel('Mobile (E.164)').fill(LEAD_MOBILE);
    await form.getByRole('button', { name: 'Save' }).click();
    await expect.poll(async () => (await server.db('paging_contacts').where({ mobile: LEAD_MOBILE }).first('user_id'))?.user_id ?? null).not.toBeNull();
    await expectAccessible(page, 'People & places, Paging');
    await screenshot(page, 'paging-settings');
    adminCookies = await admin.context.cookies(server.url);
    await admin.context.close();
  });

  it('the lead is on tier 1 of the full team, and a case is ready to page', async () => {
    // The tier itself through the same API the panel's Save uses: the lead is paged for the full team.
    const api = browserlessClient(server.url);
    for (const c of adminCookies) await api.jar.setCookie(`${c.name}=${c.value}`, server.url);
    const general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
    const lead = (await server.db('users').where({ email: 'lead@plumbline.test' }).first('id')).id;
    const plan: PagingPlan = (await (await api.get(`/api/paging/hospitals/${general}`)).json()).plan;
    plan.levels.full.tiers = [[{ kind: 'person', value: lead }]];
    expect((await api.send('PUT', `/api/paging/hospitals/${general}/plan`, plan)).status).toBe(200);

    // A case ready to page: acknowledged, decided at the recommendation, in a bay.
    // SBP < 90 at 10–64 years is high risk [source: Newgard 2022] → the example policy's full level.
    const answer = await command<{ summary: CaseSummary }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 10, clinical: { ageYears: 41, sex: 'female', fall: { heightM: 6, surface: 'concrete', firstImpact: 'back' }, vitals: { sbp: 84, hr: 118 } } });
    if (!answer.ok) throw new Error(answer.error.message);
    const nurseApi = await signIn(server.url, 'nurse@plumbline.test');
    let s = answer.data.summary;
    for (const [action, body] of [['acknowledge', {}], ['decide', { level: 'full' }], ['bay', { bay: 'Majors 1' }]] as const) {
      const res = await nurseApi.send('POST', `/api/cases/${s.id}/${action}`, { rowVersion: s.rowVersion, ...body });
      expect(res.status).toBe(200);
      s = (await res.json()).case;
    }
    summary = s;
  });

  let phone: BrowserContext;
  let sms: Page;
  const card = () => nurse.page.locator(`article[data-case-number="${summary.caseNumber}"]`);

  it('the nurse pages the team from the board', async () => {
    nurse = await newSignedInPage(browser, server.url, 'nurse@plumbline.test', { path: '/board', device: DESK });
    await card().getByRole('button', { name: 'Page team' }).click();
    await nurse.page.getByRole('button', { name: 'Page Full trauma team' }).click();
    await expect.poll(() => card().locator('.primary-action').textContent(), { timeout: 10_000 }).toBe('Mark arrived');
  });

  it('the local SMS service page shows the text sent to the lead', async () => {
    phone = await browser.newContext({ viewport: DESK.viewport });
    sms = await phone.newPage();
    await sms.goto(server.sms.fakeUrl!);
    const row = sms.locator('tr', { hasText: `Case ${summary.caseNumber}.` });
    await row.waitFor();
    expect(await row.innerText()).toContain(LEAD_MOBILE);
    expect(await row.innerText()).toMatch(/FULL TRAUMA TEAM Alderwick General Hospital: 41-year-old female, fall 19\.7 ft onto concrete, ETA \d\d:\d\d \(\d+ min\), Majors 1/);
    await expectAccessible(sms, 'local SMS service');
    await screenshot(sms, 'sms-fake-page');
  });

  it('a reply "1" sent from that page shows on the card: the lead is on the way', async () => {
    await sms.getByLabel('From number').selectOption(LEAD_MOBILE);
    await sms.getByLabel('Reply').fill('1');
    await sms.getByRole('button', { name: 'Send reply' }).click();
    await expect.poll(() => sms.getByRole('status').textContent(), { timeout: 10_000 }).toBe(`Reply from ${LEAD_MOBILE} delivered to Plumbline.`);
    await phone.close();
    // Live over the board's socket: no reload.
    await expect.poll(() => card().locator('.who-coming').innerText(), { timeout: 10_000 }).toMatch(/Dr\. Sasha Imbert: on my way \d\d:\d\d/);
    await expectAccessible(nurse.page, 'Inbound board with replies');
    await screenshot(nurse.page, 'board-who-is-coming');
  });

  it('the administrator sees the SMS with its delivery state on the Messages sent page', async () => {
    const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/mail', device: DESK });
    const page = admin.page;
    const item = page.locator('li.message[data-channel="sms"]', { hasText: `case ${summary.caseNumber}` });
    await item.waitFor();
    await expect.poll(() => item.locator('.state').textContent(), { timeout: 5000 }).toMatch(/^Delivered/);
    expect(await item.innerText()).toContain('SMS to Dr. Sasha Imbert (+61491570156)');
    await expectAccessible(page, 'Messages sent');
    await screenshot(page, 'messages-sent');
    await admin.context.close();
  });
});
