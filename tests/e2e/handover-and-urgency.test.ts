import { randomUUID } from 'node:crypto';
import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import type { CaseSummary } from '../../shared/schemas/cases';
import { urgencyGroup, URGENCY_GROUPS } from '../../shared/board/urgency';
import { LEVEL_RANK } from '../../shared/triage/policy';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';
import { collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, PHONE } from './support/browser';

// The crew's words reach the ED intact, and the board puts the most urgent patient first.
// Check values: a fall over 10 ft (3.048 m) is moderate risk and SBP < 90 at age 10–64 is high
// risk [source: 2021 field-triage guideline, Newgard CD et al., 2022]; the shipped example policy
// answers moderate with a trauma consult and high with the full team [ours: SOURCES.md §6 example policy].

const DESK_800 = { viewport: { width: 1280, height: 800 } };

/** What the screen shows, not the whole page: the sizes named in the issue are what people see. */
async function shot(page: Page, name: string): Promise<void> {
  mkdirSync(join('tests', 'e2e', 'screenshots'), { recursive: true });
  await page.screenshot({ path: join('tests', 'e2e', 'screenshots', `${name}.png`) });
}
const WALL = { viewport: { width: 1920, height: 1080 } };

/** A card's action: the next step is on the card, the others one tap away under More. */
async function act(card: ReturnType<Page['locator']>, name: string): Promise<void> {
  const button = card.getByRole('button', { name, exact: true });
  if (!(await button.count())) await card.getByRole('button', { name: /^More actions and details/ }).click();
  await button.click();
}

describeInBrowser('handover, urgency order, wall and bays in Chromium', () => {
  let server: TestServer;
  let browser: Browser;
  let medic: { context: BrowserContext; page: Page };
  let nurse: { context: BrowserContext; page: Page };
  let crew: TestSocket;
  let nurseApi: SignedInClient;
  let general: number;
  let sentId: number;
  let sentNumber: string;
  const errors: string[] = [];

  const countCases = async () => Number((await server.db('cases').count({ n: '*' }).first())!.n);
  const latestInput = async (id: number) => {
    const row = await server.db('case_revisions').where({ case_id: id }).orderBy('revision', 'desc').first('input', 'revision');
    return { revision: row.revision as number, input: JSON.parse(row.input) };
  };

  async function submit(clinical: unknown, etaMinutes: number | null, unitId?: number): Promise<CaseSummary> {
    const answer = await command<{ summary: CaseSummary }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, unitId, etaMinutes, clinical });
    if (!answer.ok) throw new Error(answer.error.message);
    return answer.data.summary;
  }

  beforeAll(async () => {
    server = await startTestServer();
    await server.db('settings').insert({ hospital_id: 0, key: 'hospital.timeZone', value: JSON.stringify('UTC') });
    // The escalation job runs on the real clock here; it must not mark cases overdue mid-click (that
    // race is the integration test's business), so Alderwick General escalates after an hour.
    await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).update({ escalation_minutes: 60 });
    browser = await launchBrowser();
    general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
    medic = await newSignedInPage(browser, server.url, 'paramedic@plumbline.test', { path: '/pre-alert', device: PHONE });
    errors.push(...collectPageErrors(medic.page));
    crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
    nurseApi = await signIn(server.url, 'nurse@plumbline.test');
  });
  afterAll(async () => {
    crew?.close();
    await browser?.close();
    await server?.close();
  });

  it('Enter in a number field moves to the next field and sends nothing; Clear can be undone for 10 seconds', async () => {
    const page = medic.page;
    const group = (name: string) => page.getByRole('group', { name, exact: true });
    await group('Destination ED').getByText('Alderwick General Hospital (Level I)', { exact: true }).click();
    await group('Unit').getByText('Medic 12', { exact: true }).click();
    const before = await countCases();
    const age = page.getByLabel('Age (years)', { exact: true });
    await age.fill('47');
    await age.press('Enter');
    // The keypad's key says Next, and does that: the focus leaves Age, the error summary stays away.
    expect(await age.getAttribute('enterkeyhint')).toBe('next');
    expect(await page.evaluate(() => document.activeElement?.id)).not.toBe('pre-alert-age');
    expect(await page.locator('#send-issues').count()).toBe(0);
    await group('Height in').getByText('metres', { exact: true }).click();
    const height = page.getByLabel('Fall height (m)', { exact: true });
    await height.fill('3.05');
    await height.press('Enter');
    await new Promise((r) => setTimeout(r, 500));
    expect(await countCases()).toBe(before);
    expect(await height.inputValue()).toBe('3.05');
    expect(await page.locator('#send-issues').count()).toBe(0);

    // Clear sits away from Send, and Undo brings the whole form back.
    await page.getByRole('button', { name: 'Clear form' }).click();
    expect(await age.inputValue()).toBe('');
    await page.getByRole('button', { name: 'Undo' }).click();
    expect(await age.inputValue()).toBe('47');
    expect(await height.inputValue()).toBe('3.05');
    const send = await page.getByRole('button', { name: 'Send pre-alert' }).boundingBox();
    const clear = await page.getByRole('button', { name: 'Clear form' }).boundingBox();
    expect(Math.abs(send!.y - clear!.y)).toBeGreaterThan(200);
  });

  it('the crew gives the handover and notes on a phone; the stored height is the figure they typed', async () => {
    const page = medic.page;
    await page.getByLabel('ETA (minutes from now)', { exact: true }).fill('25');
    await page.getByLabel('Heart rate (HR) (/min)', { exact: true }).fill('96');
    await page.getByLabel('Systolic BP (SBP) (mmHg)', { exact: true }).fill('132');
    await page.getByRole('group', { name: 'Anticoagulants', exact: true }).getByText('Yes', { exact: true }).click();
    await page.getByLabel('Time of injury', { exact: true }).fill('02:40');
    await page.getByLabel('Anticoagulant name', { exact: true }).fill('apixaban');
    await page.getByLabel('Last dose at', { exact: true }).fill('08:00');
    await page.getByRole('group', { name: 'Treatment given' }).getByText('Splint', { exact: true }).click();
    await page.getByRole('group', { name: 'Treatment given' }).getByText('Pain relief', { exact: true }).click();
    await page.getByLabel('Allergies, if known', { exact: true }).fill('penicillin');
    await page.getByLabel('Notes for the ED').fill('Fell from a loft ladder onto a tiled floor; wife on scene.');
    await expectAccessible(page, 'New pre-alert with the handover filled');
    await shot(page, 'i17-pre-alert-handover-390');
    // The sticky send bar never covers the field in focus.
    await page.getByLabel('Allergies, if known', { exact: true }).focus();
    const bar = await page.locator('.send-bar').boundingBox();
    const field = await page.getByLabel('Allergies, if known', { exact: true }).boundingBox();
    expect(field!.y + field!.height).toBeLessThanOrEqual(bar!.y);

    const before = await countCases();
    await page.getByRole('button', { name: 'Send pre-alert' }).click();
    await expect.poll(countCases).toBe(before + 1);
    const row = await server.db('cases').orderBy('id', 'desc').first('id', 'case_number', 'recommended_level');
    sentId = row.id;
    sentNumber = row.case_number;
    // 3.05 m > 3.048 m [source: Newgard 2022] → moderate → consult; on an anticoagulant as well.
    expect(row.recommended_level).toBe('consult');
    const { input } = await latestInput(sentId);
    expect(input.fall).toMatchObject({ heightM: 3.05, entered: { value: 3.05, unit: 'm' } });
    expect(input.handover).toMatchObject({ anticoagulantName: 'apixaban', treatments: ['splint', 'analgesia'], allergies: 'penicillin' });
    expect(new Date(input.handover.injuredAt).getHours()).toBe(2);
  });

  it('an update of one vital sign leaves the height exactly as sent', async () => {
    const page = medic.page;
    // What the browser puts on the wire: the update carries only the changed heart rate.
    const cdp = await medic.context.newCDPSession(page);
    const frames: string[] = [];
    cdp.on('Network.webSocketFrameSent', (e) => frames.push(e.response.payloadData));
    await cdp.send('Network.enable');
    await page.getByRole('tab', { name: /^Open cases/ }).click();
    await page.getByRole('button', { name: `Send an update for case ${sentNumber}` }).click();
    const update = page.getByRole('dialog', { name: `Update for case ${sentNumber}` });
    await update.getByLabel('Heart rate (HR) (/min)', { exact: true }).fill('104');
    // Enter in the dialog moves on too; only the button sends.
    await update.getByLabel('Heart rate (HR) (/min)', { exact: true }).press('Enter');
    expect((await latestInput(sentId)).revision).toBe(1);
    await expectAccessible(page, 'Update dialog on a phone');
    await shot(page, 'i17-update-dialog-390');
    await update.getByRole('button', { name: 'Send update' }).click();
    await update.waitFor({ state: 'hidden' });
    const { revision, input } = await latestInput(sentId);
    expect(revision).toBe(2);
    expect(input.fall.heightM).toBe(3.05);
    expect(input.fall.entered).toEqual({ value: 3.05, unit: 'm' });
    expect(input.vitals.hr).toBe(104);
    expect(input.vitals.sbp).toBe(132);
    expect(input.handover.allergies).toBe('penicillin');
    expect((await server.db('cases').where({ id: sentId }).first('recommended_level')).recommended_level).toBe('consult');
    const sent = frames.find((f) => f.includes('"case:update"'));
    expect(sent, 'the update frame').toBeDefined();
    const [, payload] = JSON.parse(sent!.slice(sent!.indexOf('['))) as [string, Record<string, unknown>];
    expect(payload).toEqual({ caseId: sentId, changes: { vitals: { hr: 104 } } });
    await cdp.detach();
  });

  it('on a busy shift the desk board is urgent first, four cases above the fold, notes and handover on the card', async () => {
    // A busy shift: cases at each level, some acknowledged, one full activation sent last.
    const moderate = { ageYears: 40, sex: 'male', fall: { heightM: 4, surface: 'grass' }, vitals: { sbp: 130, hr: 80 } };
    const low = { ageYears: 30, sex: 'female', fall: { heightM: 1, surface: 'grass' }, vitals: { sbp: 125, hr: 75 } };
    const high = { ageYears: 58, sex: 'male', fall: { heightM: 6, surface: 'concrete' }, vitals: { sbp: 84, hr: 120 } };
    const acknowledged: CaseSummary[] = [];
    for (let i = 0; i < 5; i++) acknowledged.push(await submit(i % 2 ? moderate : low, 5 + i));
    for (const c of acknowledged) expect((await nurseApi.send('POST', `/api/cases/${c.id}/acknowledge`, { rowVersion: c.rowVersion })).status).toBe(200);
    await submit(low, 4);
    await submit(moderate, 25);
    const full = await submit(high, 30);

    nurse = await newSignedInPage(browser, server.url, 'nurse@plumbline.test', { path: '/board', device: DESK_800 });
    errors.push(...collectPageErrors(nurse.page));
    const page = nurse.page;
    // A step that cannot happen fails on its own line, not at the test's time limit.
    page.setDefaultTimeout(8000);
    await page.locator('article.case-card').first().waitFor();
    await shot(page, 'i17-board-desk-1280');
    const order = await page.locator('article[data-case-number]').evaluateAll((cards) => cards.map((c) => c.getAttribute('data-case-number')));
    const board = (await (await nurseApi.get('/api/board')).json()) as { cases: CaseSummary[]; at: number };
    const byNumber = new Map(board.cases.map((c) => [c.caseNumber, c]));
    const shown = order.map((n) => byNumber.get(n!)!);
    // Groups never go back up: waiting, then acknowledged, then past ETA, then arrived.
    const groups = shown.map((c) => URGENCY_GROUPS.indexOf(urgencyGroup(c, board.at)));
    expect(groups).toEqual([...groups].sort((a, b) => a - b));
    // Within the waiting group, the level never rises down the board.
    const waitingLevels = shown.filter((c) => urgencyGroup(c, board.at) === 'waiting').map((c) => LEVEL_RANK[c.decidedLevel ?? c.recommendedLevel]);
    expect(waitingLevels).toEqual([...waitingLevels].sort((a, b) => b - a));
    // The full activation, sent last with the furthest ETA, is above every acknowledged case and
    // every waiting case of a lower level, and in view at once.
    const fullAt = order.indexOf(full.caseNumber);
    const lower = shown.filter((c) => c.acknowledgedAt != null || LEVEL_RANK[c.decidedLevel ?? c.recommendedLevel] < LEVEL_RANK.full).map((c) => order.indexOf(c.caseNumber));
    expect(Math.min(...lower)).toBeGreaterThan(fullAt);
    const fullBox = await page.locator(`article[data-case-number="${full.caseNumber}"]`).boundingBox();
    expect(fullBox!.y + fullBox!.height).toBeLessThanOrEqual(800);
    // The server's own list is in the same order.
    expect(board.cases.filter((c) => order.includes(c.caseNumber)).map((c) => c.caseNumber)).toEqual(order);

    // Above the fold: a card's heading, level and countdown in view on the first screen.
    const aboveFold = await page.locator('article.case-card header.top').evaluateAll((heads) => heads.filter((h) => h.getBoundingClientRect().bottom <= window.innerHeight).length);
    expect(aboveFold).toBeGreaterThanOrEqual(4);

    const card = page.locator(`article[data-case-number="${sentNumber}"]`);
    const text = await card.innerText();
    expect(text).toContain('Crew’s notes: Fell from a loft ladder onto a tiled floor; wife on scene.');
    expect(text).toContain('Time of injury: 02:40');
    expect(text).toContain('Anticoagulant: apixaban, last dose 08:00');
    expect(text).toContain('Treatment given: Splint, Pain relief');
    expect(text).toContain('Allergies: penicillin');
    // Shown in the hospital's feet with the criterion's own figure beside it; stored as typed.
    // 3.05 m / 0.3048 = 10.0066 ft → 10.0 ft (1 ft = 0.3048 m exactly, common practice), yet above
    // the exact 10 ft (3.048 m) threshold [source: Newgard 2022, SOURCES.md §2.6].
    expect(text).toContain('10.0 ft (entered as 3.05 m)');
    expect(text).toContain('criterion: above 10 ft (3.048 m)');
    await expectAccessible(page, 'Inbound board, desk, busy shift');
    await shot(page, 'i17-board-desk-1280');
  });

  it('the card’s reasons give the height in the hospital’s feet to one decimal, the criterion’s figure exact', async () => {
    const card = nurse.page.locator(`article[data-case-number="${sentNumber}"]`);
    await card.getByRole('button', { name: `More actions and details for case ${sentNumber}` }).click();
    // 3.05 m / 0.3048 = 10.0066 ft → 10.0 ft, and 3.1 m (1 ft = 0.3048 m exactly, common practice);
    // above the 10 ft (3.048 m) threshold [source: Newgard 2022, SOURCES.md §2.6].
    await expect.poll(() => card.locator('.criteria li').allInnerTexts()).toContain('Fall from height > 10 feet (3.048 m) (fall 10.0 ft (3.1 m), above the 10 ft (3.048 m) threshold)');
    await card.screenshot({ path: join('tests', 'e2e', 'screenshots', 'i17-card-heights.png') });
    await card.getByRole('button', { name: `Less actions and details for case ${sentNumber}` }).click();
  });

  it('after Acknowledge the focus moves to the next card; the Decide dialog fits at 1280×800 and 1366×768', async () => {
    const page = nurse.page;
    const first = page.locator('article.case-card').first();
    const firstNumber = await first.getAttribute('data-case-number');
    await first.getByRole('button', { name: 'Acknowledge', exact: true }).click();
    await expect.poll(() => page.evaluate(() => document.activeElement?.getAttribute('data-case-number') ?? null)).toBeTruthy().catch(async (err) => {
      await shot(page, 'i17-debug-after-ack');
      throw new Error(`${(err as Error).message}; focus on ${await page.evaluate(() => document.activeElement?.outerHTML.slice(0, 200))}; card: ${await first.innerText()}`);
    });
    const focused = await page.evaluate(() => document.activeElement?.getAttribute('data-case-number'));
    expect(focused).not.toBe(firstNumber);

    for (const size of [{ width: 1280, height: 800 }, { width: 1366, height: 768 }]) {
      await page.setViewportSize(size);
      await act(page.locator(`article[data-case-number="${firstNumber}"]`), 'Decide level');
      const dialog = page.getByRole('dialog', { name: 'Decide the activation level' });
      await dialog.waitFor();
      await expectAccessible(page, `Decide dialog at ${size.width}×${size.height}`);
      const button = await dialog.getByRole('button', { name: /^Decide/ }).boundingBox();
      expect(button!.y + button!.height).toBeLessThanOrEqual(size.height);
      await shot(page, `i17-decide-${size.width}`);
      await dialog.getByRole('button', { name: 'Cancel' }).click();
      await dialog.waitFor({ state: 'hidden' });
    }
    await page.setViewportSize(DESK_800.viewport);
  });

  it('assigning an occupied bay warns and needs a confirmation; the server refuses it unconfirmed', async () => {
    const page = nurse.page;
    const card = page.locator(`article[data-case-number="${sentNumber}"]`);
    await card.getByRole('button', { name: 'Acknowledge', exact: true }).click();
    await expect.poll(() => card.locator('.mark').count()).toBe(0);
    await act(card, 'Assign bay');
    const dialog = page.getByRole('dialog', { name: 'Assign a resus bay' });
    await dialog.getByRole('button', { name: 'Majors 2', exact: true }).click();
    await expect.poll(() => card.locator('.bay').textContent()).toBe('Majors 2');

    const other = (await server.db('cases').where({ hospital_id: general }).whereNotNull('acknowledged_at').whereNull('bay').whereIn('state', ['acknowledged']).first('id', 'case_number', 'row_version'))!;
    const refused = await nurseApi.send('POST', `/api/cases/${other.id}/bay`, { rowVersion: other.row_version, bay: 'Majors 2' });
    expect(refused.status).toBe(409);
    expect((await refused.json()).error.code).toBe('bay_occupied');

    const otherCard = page.locator(`article[data-case-number="${other.case_number}"]`);
    await act(otherCard, 'Assign bay');
    await dialog.getByRole('button', { name: `Majors 2 (taken: ${sentNumber})` }).click();
    const warning = dialog.getByRole('alert').filter({ hasText: 'already has case' });
    await expect.poll(() => warning.textContent()).toContain(`Majors 2 already has case ${sentNumber}.`);
    expect((await server.db('cases').where({ id: other.id }).first('bay')).bay).toBeNull();
    await expectAccessible(page, 'Bay dialog with the double-booking warning');
    await shot(page, 'i17-bay-warning-1280');
    await dialog.getByRole('button', { name: 'Assign Majors 2 anyway' }).click();
    await expect.poll(() => otherCard.locator('.bay').textContent()).toBe('Majors 2');
  });

  it('the page e-mail carries the notes and handover, with the ETA in words and times in the hospital’s zone', async () => {
    const page = nurse.page;
    const card = page.locator(`article[data-case-number="${sentNumber}"]`);
    await act(card, 'Decide level');
    const decide = page.getByRole('dialog', { name: 'Decide the activation level' });
    await decide.getByRole('button', { name: 'Decide this level' }).click();
    await decide.waitFor({ state: 'hidden' });
    await act(card, 'Page team');
    await expectAccessible(page, 'Page confirmation');
    await page.getByRole('button', { name: 'Page Trauma consult' }).click();
    await expect.poll(async () => (await server.db('mail_messages').where('subject', 'like', `%case ${sentNumber})`).count({ n: '*' }).first())!.n).toBe(1);
    const mail = await server.db('mail_messages').where('subject', 'like', `%case ${sentNumber})`).first('subject', 'text');
    expect(mail.subject).toMatch(/ETA \d\d:\d\d UTC \(in \d+ min\), Majors 2/);
    expect(mail.text).toContain("Crew's notes: Fell from a loft ladder onto a tiled floor; wife on scene.");
    expect(mail.text).toMatch(/Time of injury: \d\d:\d\d UTC/);
    expect(mail.text).toMatch(/Anticoagulant: apixaban, last dose \d\d:\d\d UTC/);
    expect(mail.text).toContain('Treatment given: Splint, Pain relief');
    expect(mail.text).toContain('Allergies: penicillin');
  });

  it('the printable handover shows the notes and the handover on one page', async () => {
    const page = nurse.page;
    await act(page.locator(`article[data-case-number="${sentNumber}"]`), 'Print handover');
    await expect.poll(() => page.locator('h1').textContent()).toBe(`Handover: case ${sentNumber}`);
    const text = await page.locator('.handover-sheet').innerText();
    expect(text).toContain('Crew’s notes: Fell from a loft ladder onto a tiled floor; wife on scene.');
    expect(text).toContain('apixaban, last dose 08:00');
    expect(text).toContain('Splint, Pain relief');
    expect(text).toContain('penicillin');
    expect(text).toContain('Decision support');
    await expectAccessible(page, 'Printable handover');
    await shot(page, 'i17-handover-print-1280');
    await page.emulateMedia({ media: 'print' });
    const pdfHeight = await page.evaluate(() => document.documentElement.scrollHeight);
    // One sheet: A4 is about 1123 CSS pixels high at 96 dpi.
    expect(pdfHeight).toBeLessThanOrEqual(1123 * 1.5);
    await page.emulateMedia({ media: 'screen' });
    await page.goBack();
    await page.locator('article.case-card').first().waitFor();
  });

  it('search finds a case by its unit or number', async () => {
    const page = nurse.page;
    await page.getByLabel('Find a case').fill('Medic 12');
    await expect.poll(() => page.locator('article[data-case-number]').count()).toBeGreaterThan(0);
    const units = await page.locator('article .case-no').allInnerTexts();
    expect(units.every((t) => t.includes('Medic 12'))).toBe(true);
    await page.getByLabel('Find a case').fill(sentNumber);
    await expect.poll(() => page.locator('article[data-case-number]').evaluateAll((cards) => cards.map((c) => c.getAttribute('data-case-number')))).toEqual([sentNumber]);
    await page.getByLabel('Find a case').fill('');
  });

  it('on a 1920×1080 wall every open case is in view without scrolling, with a sound control', async () => {
    const wall = await newSignedInPage(browser, server.url, 'nurse@plumbline.test', { path: '/board?wall=1', device: WALL });
    const page = wall.page;
    await page.locator('article.case-card').first().waitFor();
    const open = Number((await server.db('cases').where({ hospital_id: general }).whereIn('state', ['en-route', 'acknowledged', 'arrived']).count({ n: '*' }).first())!.n);
    expect(open).toBeGreaterThanOrEqual(12);
    await expect.poll(() => page.locator('article.case-card').count()).toBe(open);
    await shot(page, 'i17-board-wall-1920');
    const outside = await page.locator('article.case-card').evaluateAll((cards) => cards.filter((c) => {
      const r = c.getBoundingClientRect();
      return r.bottom > window.innerHeight || r.right > window.innerWidth;
    }).map((c) => c.getAttribute('data-case-number')));
    expect(outside).toEqual([]);
    expect(await page.evaluate(() => document.documentElement.scrollHeight <= window.innerHeight + 1)).toBe(true);
    expect(await page.getByRole('button', { name: /sound/i }).isVisible()).toBe(true);
    await expectAccessible(page, 'Wall display, busy shift');
    await shot(page, 'i17-board-wall-1920');
    await wall.context.close();
  });

  it('People & places lists each hospital’s bays with what is in them', async () => {
    const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/people', device: DESK_800 });
    const page = admin.page;
    await page.getByRole('tab', { name: 'Bays' }).click();
    const list = page.getByLabel('Bays (one a line, in the order the board offers them)').first();
    await expect.poll(() => list.inputValue()).toContain('Resus 1');
    await expect.poll(() => page.getByText('(double booked)').count()).toBe(1);
    await expectAccessible(page, 'People & places, bays');
    await shot(page, 'i17-people-bays-1280');
    await admin.context.close();
    expect(errors).toEqual([]);
  });
});
