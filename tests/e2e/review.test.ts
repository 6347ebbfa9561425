import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs } from '../support/socket';
import { collectPageErrors, describeInBrowser, DESK, expectAccessible, launchBrowser, screenshot, signInThroughPage } from './support/browser';

// The trauma lead's review after a shift: find the cases decided below their recommendation,
// read a timeline, flag one for peer review and sign another off; then see the audit trail
// break on the screen when a row is altered directly in the database.

// 34-year-old, SBP 84 < 90 (2021 guideline, Newgard 2022 [source]): full under the example policy.
const FULL = { ageYears: 34, sex: 'male', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 120 } };
const MIN = 60_000;
// The pre-alerts are made an hour in the past, so the arrival 30 minutes ago comes after them.
let offset = 0;
const clock = { now: () => Date.now() + offset };

describeInBrowser('Activation review in Chromium', () => {
  let server: TestServer;
  let browser: Browser;
  let nurse: SignedInClient;
  beforeAll(async () => {
    server = await startTestServer({}, { clock });
    browser = await launchBrowser();
    nurse = await signIn(server.url, 'nurse@plumbline.test');
  }, 30_000);
  afterAll(async () => {
    await browser?.close();
    await server?.close();
  });

  async function act(caseId: number, action: string, body: Record<string, unknown> = {}) {
    const { row_version } = await server.db('cases').where({ id: caseId }).first('row_version');
    const res = await nurse.send('POST', `/api/cases/${caseId}/${action}`, { rowVersion: row_version, ...body });
    if (!res.ok) throw new Error(`${action}: ${res.status} ${await res.text()}`);
  }

  /** A full-level pre-alert handled on the board today: decided, arrived 30 min ago, team after `teamMin`, closed. */
  async function handledCase(decide: string, reason: string | undefined, teamMin: number): Promise<{ id: number; number: string }> {
    const crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
    const hospitalId = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
    offset = -60 * MIN;
    const answer = await command<{ caseId: number; caseNumber: string }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId, etaMinutes: 8, clinical: FULL });
    crew.close();
    if (!answer.ok) throw new Error(answer.error.message);
    const id = answer.data.caseId;
    await act(id, 'acknowledge');
    await act(id, 'decide', { level: decide, ...(reason ? { reason } : {}) });
    offset = 0;
    const arrived = Date.now() - 30 * MIN;
    await act(id, 'arrived', { at: arrived });
    await act(id, 'team-at-bedside', { at: arrived + teamMin * MIN });
    await act(id, 'close');
    return { id, number: answer.data.caseNumber };
  }

  async function openAs(email: string, path: string): Promise<Page> {
    const context = await browser.newContext({ ...DESK, baseURL: server.url, timezoneId: 'UTC' });
    const page = await context.newPage();
    await signInThroughPage(page, server.url, email, path);
    return page;
  }

  it('a trauma lead finds the cases decided below their recommendation, flags one, signs another off, and sees a tampered trail', async () => {
    const below = await handledCase('limited', 'Crew over-called; alert and talking on arrival', 20);
    const asCalled = await handledCase('full', undefined, 9);

    const page = await openAs('lead@plumbline.test', '/review');
    const errors = collectPageErrors(page);
    await page.getByRole('heading', { name: 'Activation review', level: 1 }).waitFor();
    await page.getByText('Audit trail intact').waitFor();
    await page.locator('.review-cases tbody tr').first().waitFor();
    await expectAccessible(page, 'Activation review, table');
    await screenshot(page, 'review-table');

    // The day the cases were made (UTC), decided below the recommendation: exactly what the
    // database holds. The day comes from the row, not the wall clock: made an hour back, a case
    // started just after midnight belongs to yesterday.
    const { created_at } = await server.db('cases').where({ id: below.id }).first('created_at');
    const today = new Date(created_at).toISOString().slice(0, 10);
    await page.getByLabel('From', { exact: true }).fill(today);
    await page.getByLabel('To', { exact: true }).fill(today);
    await page.getByLabel('Decided below the recommendation').check();
    const start = Date.parse(`${today}T00:00:00Z`);
    const expected = (await server.db('cases').where('created_at', '>=', start).where('created_at', '<', start + 1440 * MIN).whereRaw(
      "(CASE decided_level WHEN 'full' THEN 3 WHEN 'limited' THEN 2 WHEN 'consult' THEN 1 WHEN 'none' THEN 0 END) < (CASE recommended_level WHEN 'full' THEN 3 WHEN 'limited' THEN 2 WHEN 'consult' THEN 1 WHEN 'none' THEN 0 END)",
    ).orderBy('created_at', 'desc').select('case_number')).map((r) => r.case_number);
    expect(expected).toContain(below.number);
    await expect.poll(() => page.locator('.review-cases tbody tr .case-link').allTextContents()).toEqual(expected);
    expect(await page.locator('.review-cases tbody tr').filter({ hasText: 'below the recommendation' }).count()).toBe(expected.length);
    expect(await page.getByRole('link', { name: 'Download these cases as CSV' }).getAttribute('href')).toBe(`/api/review/cases.csv?from=${today}&to=${today}&timeZone=UTC&below=true&sort=createdAt&dir=desc`);
    await screenshot(page, 'review-below');

    // The timeline of the case decided below.
    await page.getByRole('link', { name: below.number, exact: true }).click();
    await page.getByRole('heading', { name: `Case ${below.number}`, level: 1 }).waitFor();
    const steps = await page.locator('.events > li .event-head strong').allTextContents();
    expect(steps).toEqual(['Pre-alert received', 'Acknowledged', 'Level decided', 'Patient arrived', 'Team leader at the bedside', 'Closed']);
    await page.getByText('Limited trauma team, below the recommended Full trauma team. Reason: “Crew over-called; alert and talking on arrival”').waitFor();
    await page.getByText('SBP 84 < 90').first().waitFor();
    expect(await page.locator('[data-interval="arrival-to-team"]').innerText()).toMatch(/20 min\s+15 min\s+Over target/);
    await expectAccessible(page, 'Case timeline');
    await screenshot(page, 'review-timeline');

    // Flagging needs a comment; then the case is on the to-discuss list.
    await page.getByRole('button', { name: 'Flag for peer review' }).click();
    await page.getByText('Say in a few words what the peer review should look at.').waitFor();
    await page.getByLabel(/^Comment/).fill('Decided below a full recommendation with SBP 84; discuss at peer review.');
    await page.getByRole('button', { name: 'Flag for peer review' }).click();
    await page.getByLabel('Outcome of the peer review').waitFor();
    expect(await page.locator('.facts .review-state').innerText()).toBe('To discuss');

    await page.emulateMedia({ media: 'print' });
    expect(await page.getByRole('button', { name: 'Print this timeline' }).isVisible()).toBe(false);
    expect(await page.locator('.app-header').isVisible()).toBe(false);
    await screenshot(page, 'review-timeline-print');
    await page.emulateMedia({ media: 'screen' });

    // Sign the other one off.
    await page.goto(`/review/cases/${asCalled.id}`);
    await page.getByRole('heading', { name: `Case ${asCalled.number}`, level: 1 }).waitFor();
    await page.getByLabel(/^Comment/).fill('As recommended; team in 9 minutes.');
    await page.getByRole('button', { name: 'Sign off' }).click();
    await expect.poll(() => page.locator('.facts .review-state').innerText()).toBe('Signed off');
    expect(await page.getByRole('button', { name: 'Sign off' }).count()).toBe(0);
    expect(await server.db('reviews').whereIn('case_id', [below.id, asCalled.id]).orderBy('id').select('case_id', 'status')).toEqual([
      { case_id: below.id, status: 'flagged' },
      { case_id: asCalled.id, status: 'signed-off' },
    ]);

    // Back on the list, the flagged case waits on the to-discuss list.
    await page.getByRole('link', { name: 'Back to Activation review' }).click();
    const discussion = page.locator('section', { has: page.getByRole('heading', { name: /^To discuss at peer review/ }) });
    await discussion.getByRole('link', { name: `Case ${below.number}` }).waitFor();
    await screenshot(page, 'review-discussion');

    // Someone edits the record directly in the database: the screen says the trail is broken.
    const target = await server.db('audit_log').where({ case_id: below.id, action: 'case.level-decided' }).first();
    await server.db.raw('DROP TRIGGER audit_log_no_update');
    await server.db('audit_log').where({ id: target.id }).update({ after: target.after.replace('"limited"', '"full"') });
    await page.getByRole('button', { name: 'Check the audit trail again' }).click();
    await page.getByRole('alert').filter({ hasText: `The audit trail is broken at row ${target.id}` }).waitFor();
    await screenshot(page, 'review-chain-broken');
    expect(errors).toEqual([]);
    await page.context().close();
  }, 90_000);

  it('the quality team reads a timeline but cannot sign off or flag', async () => {
    const caseId = (await server.db('cases').where({ state: 'closed' }).orderBy('id', 'desc').first('id')).id;
    const page = await openAs('quality@plumbline.test', `/review/cases/${caseId}`);
    await page.locator('.events > li').first().waitFor();
    expect(await page.getByRole('button', { name: 'Sign off' }).count()).toBe(0);
    expect(await page.getByRole('button', { name: 'Flag for peer review' }).count()).toBe(0);
    await page.context().close();
  }, 30_000);
});
