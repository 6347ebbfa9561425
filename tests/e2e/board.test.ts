import { randomUUID } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import type { CaseSummary } from '../../shared/schemas/cases';
import { loadConfig, type Config } from '../../server/config';
import { startServer, type RunningServer } from '../../server/server';
import { browserlessClient } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';
import { DESK, PHONE, collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, screenshot } from './support/browser';

// Two Chromium contexts, as two people on two devices: the crew's phone and the ED's desk.
// The pre-alert is sent over the crew's own signed-in socket (the session cookie of the
// paramedic's browser context); the acknowledgement is checked on that socket and over REST.

describeInBrowser('the Inbound board in Chromium', () => {
  // Our own server rather than the shared helper: this file restarts it on the same port and file.
  const dataDir = mkdtempSync(join(tmpdir(), 'plumbline-e2e-board-'));
  let config: Config;
  let server: RunningServer;
  let browser: Browser;
  let nurse: { context: BrowserContext; page: Page };
  let medic: { context: BrowserContext; page: Page };
  let crew: TestSocket;
  let general: number;
  let errors: string[];
  let sent: CaseSummary;

  beforeAll(async () => {
    config = loadConfig({ NODE_ENV: 'test' }, { port: 0, host: '127.0.0.1', dataDir, logLevel: 'silent' });
    server = await startServer(config);
    config = { ...config, port: server.port };
    browser = await launchBrowser();
    general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
    [nurse, medic] = await Promise.all([
      newSignedInPage(browser, server.url, 'nurse@plumbline.test', { path: '/board', device: DESK }),
      newSignedInPage(browser, server.url, 'paramedic@plumbline.test', { path: '/pre-alert', device: PHONE }),
    ]);
    errors = collectPageErrors(nurse.page);
    const cookies = await medic.context.cookies(server.url);
    const crewClient = browserlessClient(server.url);
    for (const c of cookies) await crewClient.jar.setCookie(`${c.name}=${c.value}`, server.url);
    crew = await connectAs(server.url, crewClient);
  });
  afterAll(async () => {
    crew?.close();
    await browser?.close();
    await server?.close();
    rmSync(dataDir, { recursive: true, force: true });
  });

  const card = (caseNumber: string) => nurse.page.locator(`article[data-case-number="${caseNumber}"]`);

  it('shows the demo cases in arrival order with their levels, marks and the caution; axe finds nothing serious', async () => {
    const page = nurse.page;
    await expect.poll(() => page.locator('h1').textContent()).toBe('Inbound board');
    await page.locator('article.case-card').first().waitFor();
    expect(await page.getByText('Alderwick General Hospital · 5 on the way · 1 in the department').count()).toBe(1);
    expect(await page.getByText('Decision support only.', { exact: false }).count()).toBe(1);
    expect(await page.locator('.mark.rose').count()).toBe(1);
    expect(await page.locator('.mark.new, .mark.overdue').count()).toBe(2);
    await page.getByRole('button', { name: 'Turn sound on' }).click();
    await expectAccessible(page, 'Inbound board');
    await screenshot(page, 'board-desk');
  });

  it('a pre-alert from the crew appears within a second, announced, with the mark on', async () => {
    const page = nurse.page;
    const answer = await command<{ summary: CaseSummary }>(crew, 'case:submit', {
      clientId: randomUUID(),
      hospitalId: general,
      etaMinutes: 1,
      // 2021 guideline (Newgard 2022) [source]: SBP < 90 at 10–64 is high risk → the example policy's full level.
      clinical: { ageYears: 63, sex: 'female', fall: { heightM: 5.5, surface: 'concrete', firstImpact: 'chest', headImpact: true }, vitals: { sbp: 82, hr: 126, rr: 28, spo2: 91, spo2RoomAir: true } },
    });
    if (!answer.ok) throw new Error(answer.error.message);
    sent = answer.data.summary;
    await card(sent.caseNumber).waitFor({ timeout: 1000 });
    const text = await card(sent.caseNumber).innerText();
    expect(text).toContain('63-year-old female');
    expect(text).toContain('Full trauma team');
    expect(text).toContain('New: not yet acknowledged');
    // 5.5 m / 0.3048 = 18.04 ft, one decimal in the hospital's feet (1 ft = 0.3048 m, common practice).
    expect(text).toContain('Fall 18.0 ft onto concrete');
    expect(text).toMatch(/SBP\s*82/);
    // Urgent first: a new full-team case sits above every acknowledged case on the board.
    const order = await page.locator('section[aria-labelledby="on-the-way"] article').evaluateAll((cards) => cards.map((c) => [c.getAttribute('data-case-number'), c.classList.contains('waiting')] as const));
    const at = order.findIndex(([n]) => n === sent.caseNumber);
    expect(order.slice(0, at).every(([, waiting]) => waiting)).toBe(true);
    await expect.poll(() => page.locator('[aria-live="assertive"]').textContent()).toBe(`New pre-alert, case ${sent.caseNumber}: Full trauma team recommended.`);
  });

  it('the acknowledgement reaches the crew within a second and the mark goes', async () => {
    const heard = nextEvent<[CaseSummary, { kind: string }]>(crew, 'case:updated', 1000);
    await card(sent.caseNumber).getByRole('button', { name: 'Acknowledge', exact: true }).click();
    const [summary, change] = await heard;
    expect([summary.id, summary.state, summary.acknowledgedBy, change.kind]).toEqual([sent.id, 'acknowledged', 'Morgan Achterberg', 'acknowledged']);
    const onCrewSide = await (await medic.page.request.get(`${server.url}/api/cases/${sent.id}`)).json();
    expect(onCrewSide.case.acknowledgedBy).toBe('Morgan Achterberg');
    await expect.poll(() => card(sent.caseNumber).locator('.mark').count()).toBe(0);
  });

  it('deciding below the recommendation asks for a reason, then bay and page follow', async () => {
    const page = nurse.page;
    await card(sent.caseNumber).getByRole('button', { name: 'Decide level' }).click();
    const dialog = page.getByRole('dialog', { name: 'Decide the activation level' });
    await dialog.waitFor();
    await dialog.getByLabel('Limited trauma team').check();
    await dialog.getByRole('button', { name: 'Decide below the recommendation' }).click();
    expect(await dialog.getByRole('alert').textContent()).toBe('A reason is required to go below the recommendation: say why in a few words.');
    await expectAccessible(page, 'decide dialog');
    await screenshot(page, 'board-decide-dialog');
    await dialog.getByLabel(/^Reason/).fill('Crew reports SBP 112 on the second set; surgeon to review on arrival.');
    await dialog.getByRole('button', { name: 'Decide below the recommendation' }).click();
    await dialog.waitFor({ state: 'hidden' });
    // The decision's details are one tap away on the card.
    await card(sent.caseNumber).getByRole('button', { name: /^More actions and details/ }).click();
    await expect.poll(() => card(sent.caseNumber).innerText()).toContain('Below the recommendation: “Crew reports SBP 112');

    await card(sent.caseNumber).getByRole('button', { name: 'Assign bay' }).click();
    await page.getByRole('dialog', { name: 'Assign a resus bay' }).getByRole('button', { name: 'Resus 3' }).click();
    await expect.poll(() => card(sent.caseNumber).locator('.bay').textContent()).toBe('Resus 3');

    await card(sent.caseNumber).getByRole('button', { name: 'Page team' }).click();
    await page.getByRole('button', { name: 'Page Limited trauma team' }).click();
    // Once paged, the next step on the card is the arrival.
    await expect.poll(() => card(sent.caseNumber).locator('.primary-action').textContent()).toBe('Mark arrived');
    const mail = await server.db('mail_messages').where('subject', 'like', `%case ${sent.caseNumber})`).first('subject', 'recipients');
    expect(JSON.parse(mail.recipients)).toEqual(['trauma-limited@alderwick-general.plumbline.test']);
    // 24-hour time with the hospital's time zone named ("06:47 UTC"), then the minutes to go.
    expect(mail.subject).toMatch(/^Limited trauma team: ETA \d\d:\d\d [A-Z][\w+:-]* \(in \d+ min\), Resus 3 \(Alderwick General Hospital, case /);
    await screenshot(page, 'board-after-page');
  });

  it('the wall display is large, dark, without controls, and accessible', async () => {
    const page = nurse.page;
    await page.getByRole('button', { name: 'Wall display' }).click();
    await expect.poll(() => page.evaluate(() => document.documentElement.classList.contains('wall'))).toBe(true);
    expect(new URL(page.url()).search).toBe('?wall=1');
    expect(await page.locator('article.case-card button').count()).toBe(0);
    expect(await page.locator('.app-header').isVisible()).toBe(false);
    const size = await page.locator('.clock .big').first().evaluate((el) => parseFloat(getComputedStyle(el).fontSize));
    // Compact cards fit a busy shift on one screen; the countdown stays the largest text on them.
    expect(size).toBeGreaterThanOrEqual(44);
    // Colours ease over 0.15 s; let them land before measuring contrast. On a busy machine a fixed
    // wait was not always enough, so wait for the last control's wall colour itself.
    await expect.poll(() => page.locator('.leave-wall').evaluate((el) => getComputedStyle(el).color), { timeout: 5000 }).toBe('rgb(201, 209, 217)');
    await page.waitForTimeout(200);
    await expectAccessible(page, 'wall display');
    await page.setViewportSize({ width: 1920, height: 1080 });
    await screenshot(page, 'board-wall');
    await page.getByRole('button', { name: 'Leave wall display' }).click();
    await expect.poll(() => page.evaluate(() => document.documentElement.classList.contains('wall'))).toBe(false);
    await page.setViewportSize(DESK.viewport);
  });

  it('after a server restart the board reloads the truth: a case closed and one sent while it was away', async () => {
    const page = nurse.page;
    const target = await server.db('cases').where({ state: 'arrived', hospital_id: general }).first('case_number', 'id', 'row_version');
    await card(target.case_number).waitFor();
    // The reload after the restart asks only for what changed while the board was away.
    const askedForChanges = page.waitForRequest((r) => r.url().includes('/api/board') && r.url().includes('changesSince='), { timeout: 30_000 });
    crew.close();
    await server.close();
    await expect.poll(() => page.getByText('Connection lost: reconnecting.', { exact: false }).count(), { timeout: 10_000 }).toBe(1);
    await screenshot(page, 'board-connection-lost');

    server = await startServer(config);
    // Both changes are made the moment the server is back, while the board is still retrying.
    const other = browserlessClient(server.url);
    for (const c of await nurse.context.cookies(server.url)) await other.jar.setCookie(`${c.name}=${c.value}`, server.url);
    const closed = await other.send('POST', `/api/cases/${target.id}/close`, { rowVersion: target.row_version });
    expect(closed.status).toBe(200);
    const crewClient = browserlessClient(server.url);
    for (const c of await medic.context.cookies(server.url)) await crewClient.jar.setCookie(`${c.name}=${c.value}`, server.url);
    crew = await connectAs(server.url, crewClient);
    const answer = await command<{ summary: CaseSummary }>(crew, 'case:submit', {
      clientId: randomUUID(),
      hospitalId: general,
      etaMinutes: 20,
      // From standing, age 30, normal vitals: no criterion → the example policy's none [ours].
      clinical: { ageYears: 30, sex: 'male', fall: { heightM: 0, surface: 'wood', firstImpact: 'upper-limb' }, vitals: { sbp: 128, hr: 76 } },
    });
    if (!answer.ok) throw new Error(answer.error.message);

    await expect.poll(() => card(answer.data.summary.caseNumber).count(), { timeout: 15_000 }).toBe(1);
    await expect.poll(() => card(target.case_number).count(), { timeout: 15_000 }).toBe(0);
    await askedForChanges;
    // Every case open at the hospital is on the board, and nothing else.
    const open = await server.db('cases').where({ hospital_id: general }).whereIn('state', ['en-route', 'acknowledged', 'arrived']).pluck('case_number');
    await expect.poll(async () => (await page.locator('article[data-case-number]').evaluateAll((cards) => cards.map((c) => c.getAttribute('data-case-number')))).sort(), { timeout: 15_000 }).toEqual([...open].sort());
    expect(await page.getByText('Connection lost', { exact: false }).count()).toBe(0);
    expect(errors.filter((e) => !/ERR_CONNECTION_REFUSED|net::|WebSocket|socket\.io/.test(e))).toEqual([]);
  });

  it('the administrator reads the page on the Messages sent page', async () => {
    const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/mail' });
    const page = admin.page;
    await expect.poll(() => page.locator('h1').textContent()).toBe('Messages sent');
    const item = page.locator('li.message', { hasText: `case ${sent.caseNumber})` });
    await item.waitFor();
    await item.getByRole('button', { name: 'Show the text' }).click();
    const text = await item.locator('pre').textContent();
    expect(text).toContain('Level: Limited trauma team');
    expect(text).toContain('Recommended by the policy: Full trauma team');
    expect(text).toContain('Bay: Resus 3');
    expect(text).toContain('Patient: 63-year-old female');
    await expectAccessible(page, 'Messages sent');
    await screenshot(page, 'mail-sent');
    await admin.context.close();
  });

  it('a trauma lead watches the board without its actions; an administrator of two EDs switches between them', async () => {
    const lead = await newSignedInPage(browser, server.url, 'lead@plumbline.test', { path: '/board' });
    const page = lead.page;
    await expect.poll(() => page.locator('h1').textContent()).toBe('Inbound board');
    await page.locator('article.case-card').first().waitFor();
    const open = await server.db('cases').where({ hospital_id: general }).whereIn('state', ['en-route', 'acknowledged', 'arrived']).pluck('case_number');
    expect((await page.locator('article.case-card').evaluateAll((cards) => cards.map((c) => c.getAttribute('data-case-number')))).sort()).toEqual(open.sort());
    expect(await page.getByText('View only: the charge nurse acknowledges and decides these cases.').count()).toBe(1);
    expect(await page.locator('article.case-card .actions').count()).toBe(0);
    expect(await page.getByRole('button', { name: /Acknowledge/ }).count()).toBe(0);
    await expectAccessible(page, 'Inbound board, view only');
    await screenshot(page, 'board-view-only');
    await lead.context.close();

    const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/board' });
    const desk = admin.page;
    await expect.poll(() => desk.locator('p.hospital').textContent()).toMatch(/^Alderwick General Hospital · /);
    await desk.getByRole('combobox', { name: 'Emergency department' }).click();
    await desk.getByRole('option', { name: 'Fenmoor Community Hospital' }).click();
    await expect.poll(() => desk.locator('p.hospital').textContent()).toMatch(/^Fenmoor Community Hospital · /);
    const community = (await server.db('hospitals').where({ name: 'Fenmoor Community Hospital' }).first('id')).id as number;
    const theirs = await server.db('cases').where({ hospital_id: community }).whereIn('state', ['en-route', 'acknowledged', 'arrived']).pluck('case_number');
    await expect.poll(async () => (await desk.locator('article.case-card').evaluateAll((cards) => cards.map((c) => c.getAttribute('data-case-number')))).sort()).toEqual(theirs.sort());
    expect(await desk.locator('article.case-card .actions').count()).toBe(0);
    // The choice is kept in the address: a refresh shows the same ED, and an ED that is not theirs falls back to their first.
    expect(new URL(desk.url()).searchParams.get('ed')).toBe(String(community));
    await desk.reload();
    await expect.poll(() => desk.locator('p.hospital').textContent()).toMatch(/^Fenmoor Community Hospital · /);
    await desk.goto(`${server.url}/board?ed=999999`);
    await expect.poll(() => desk.locator('p.hospital').textContent()).toMatch(/^Alderwick General Hospital · /);

    // On a slow answer the socket connects before the board's first snapshot is back, and its
    // reload starts then: it asks for the ED in the address too, not the person's first.
    const handlers = server.http.listeners('request');
    server.http.removeAllListeners('request');
    server.http.on('request', (req, res) => {
      const pass = () => handlers.forEach((handler) => handler.call(server.http, req, res));
      if (req.url?.startsWith('/api/board')) setTimeout(pass, 1_500);
      else pass();
    });
    try {
      await desk.goto(`${server.url}/board?ed=${community}`);
      await expect.poll(() => desk.locator('p.hospital').textContent(), { timeout: 15_000 }).toMatch(/^Fenmoor Community Hospital · /);
      // Both answers (the first snapshot's and the reload's) have come back by now.
      await desk.waitForTimeout(3_500);
      expect(await desk.locator('p.hospital').textContent()).toMatch(/^Fenmoor Community Hospital · /);
    } finally {
      server.http.removeAllListeners('request');
      for (const handler of handlers) server.http.on('request', handler as (...args: unknown[]) => void);
    }
    await admin.context.close();
  });
});
