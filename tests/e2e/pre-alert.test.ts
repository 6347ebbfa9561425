import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser, BrowserContext, Page } from 'playwright-core';
import { announceCase } from '../../server/realtime/broadcast';
import { caseSummary } from '../../server/services/cases/summary';
import { startTestServer, type TestServer } from '../support/server';
import type { SignedInClient } from '../support/sign-in';
import { command, connectAs } from '../support/socket';
import { collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, PHONE, screenshot } from './support/browser';

// Check values: 2021 field-triage guideline (Newgard CD et al., 2022) [source] for the field
// risk; the shipped example policy (SOURCES.md §6) [ours] for the level's name.

describeInBrowser('New pre-alert on a phone in Chromium', () => {
  let server: TestServer;
  let browser: Browser;
  let context: BrowserContext;
  let page: Page;
  let errors: string[];
  // Whether the socket can reach the server; the test cuts it and brings it back at will.
  let signal = true;

  const countCases = async () => Number((await server.db('cases').count({ n: '*' }).first())!.n);
  const connectionText = () => page.getByTestId('connection').textContent();

  async function fill(label: string, value: string): Promise<void> {
    const input = page.getByLabel(label, { exact: true });
    await input.fill(value);
  }
  /** Taps one option of a named group of large segment buttons. */
  async function choose(group: string, option: string): Promise<void> {
    await page.getByRole('group', { name: group, exact: true }).getByText(option, { exact: true }).click();
  }

  async function loseSignal(): Promise<void> {
    signal = false;
    await context.setOffline(true);
    // The link in use drops too (the transport closes, so socket.io reconnects by itself).
    const engine = server.io.engine as unknown as { clients: Record<string, { close(): void }> };
    for (const client of Object.values(engine.clients)) client.close();
    await expect.poll(connectionText).toMatch(/^No signal/);
  }

  beforeAll(async () => {
    server = await startTestServer();
    browser = await launchBrowser();
    ({ context, page } = await newSignedInPage(browser, server.url, 'paramedic@plumbline.test', { path: '/pre-alert', device: PHONE }));
    errors = collectPageErrors(page);
    // No signal at the server's edge as well: a handshake is refused, as an unreachable server
    // would fail it, and socket.io's own reconnection keeps trying with its backoff.
    const engine = server.io.engine as unknown as { opts: { allowRequest?: (req: unknown, cb: (err: string | null | undefined, ok: boolean) => void) => void } };
    const allow = engine.opts.allowRequest;
    engine.opts.allowRequest = (req, cb) => (signal ? (allow ? allow(req, cb) : cb(null, true)) : cb('no signal', false));
    await page.getByTestId('connection').getByText('Connected', { exact: true }).waitFor();
  });

  afterAll(async () => {
    await context?.close();
    await browser?.close();
    await server?.close();
  });

  it('fills a pre-alert with gloves-sized controls; the live result turns high risk, full team, when SBP drops below 90', async () => {
    await choose('Destination ED', 'Alderwick General Hospital (Level I)');
    await choose('Unit', 'Medic 11');
    await fill('ETA (minutes from now)', '12');
    // A child's height is asked under 15, for the 2011 children's fall rule (SOURCES.md §3.4) [ours].
    await fill('Age (years)', '6');
    await page.getByLabel("Child's height, if known (cm)").waitFor();
    await fill('Age (years)', '34');
    await page.getByLabel("Child's height, if known (cm)").waitFor({ state: 'detached' });
    await choose('Sex', 'Male');
    await choose('Height in', 'feet');
    await fill('Fall height (ft)', '12');
    await expect.poll(() => page.locator('.readout').first().textContent()).toBe('= 3.66 m · 12.0 ft');
    await choose('Landing surface', 'Concrete');
    await fill('Systolic BP (SBP) (mmHg)', '120');
    await fill('Heart rate (HR) (/min)', '88');

    // 12 ft > 10 ft [source: Newgard 2022] → moderate; the example policy calls a consult. The crew
    // reads the height in the unit they typed, the criterion's figure exact (SOURCES.md §2.6).
    await expect.poll(() => page.getByTestId('field-risk').textContent()).toBe('Moderate risk');
    expect(await page.getByTestId('activation').textContent()).toBe('Trauma consult');
    expect(await page.getByTestId('criteria').locator('li').allInnerTexts()).toEqual(['MODERATE\nFall from height > 10 feet (3.048 m): fall 12.0 ft (3.7 m), above the 10 ft (3.048 m) threshold → Trauma consult\n2021 field-triage guideline (Newgard 2022)']);

    await fill('Systolic BP (SBP) (mmHg)', '84');
    // SBP 84 < 90 at age 34 [source: Newgard 2022] → high; the example policy calls the full team.
    await expect.poll(() => page.getByTestId('field-risk').textContent()).toBe('High risk');
    expect(await page.getByTestId('activation').textContent()).toBe('Full trauma team');
    const criteria = await page.getByTestId('criteria').locator('li').allInnerTexts();
    expect(criteria.some((line) => line.includes('SBP 84 < 90, age 34 (10–64)'))).toBe(true);

    // Every tap target of the form is at least 44 px high.
    const small = await page.locator('form#pre-alert-form label.option, form#pre-alert-form label.row, form#pre-alert-form input[type=text], form#pre-alert-form button').evaluateAll((els) =>
      els.map((el) => [el.textContent?.trim() || el.id, Math.round(el.getBoundingClientRect().height)] as const).filter(([, h]) => h < 44),
    );
    expect(small).toEqual([]);
    await expectAccessible(page, 'New pre-alert, filled');
    await screenshot(page, 'pre-alert-phone-filled');

    const before = await countCases();
    await page.getByRole('button', { name: 'Send pre-alert' }).click();
    await expect.poll(countCases).toBe(before + 1);
    const row = await server.db('cases').orderBy('id', 'desc').first('case_number', 'recommended_level', 'field_risk');
    expect([row.recommended_level, row.field_risk]).toEqual(['full', 'high']);
    await page.getByRole('tab', { name: /^Open cases/ }).click();
    const card = page.locator(`article[data-case-number="${row.case_number}"]`);
    await expect.poll(() => card.locator('h3').textContent()).toBe(`Case ${row.case_number}`);
    expect(await card.getByTestId('case-state').textContent()).toBe('On the way');
    // Cleared for the next patient, with unit and destination kept.
    await page.getByRole('tab', { name: 'Pre-alert form' }).click();
    expect(await page.getByLabel('Age (years)', { exact: true }).inputValue()).toBe('');
    expect(await page.getByRole('group', { name: 'Unit', exact: true }).locator('label.chosen').textContent()).toBe('Medic 11');
    expect(await page.getByRole('group', { name: 'Destination ED', exact: true }).locator('label.chosen').textContent()).toBe('Alderwick General Hospital (Level I)');
  });

  it('the case card shows the ED’s acknowledgement and the bay live', async () => {
    const { id, case_number: caseNumber } = await server.db('cases').orderBy('id', 'desc').first('id', 'case_number');
    const nurse = await server.db('users').where({ email: 'nurse@plumbline.test' }).first('id');
    const at = Date.parse('2026-12-03T03:12:00');
    await server.db('cases').where({ id }).update({ state: 'acknowledged', acknowledged_at: at, acknowledged_by: nurse.id, bay: 'Resus 2', row_version: 5 });
    await page.getByRole('tab', { name: /^Open cases/ }).click();
    announceCase(server.deps, await caseSummary(server.db, id), { kind: 'acknowledged', at, by: 'Morgan Achterberg' });
    const card = page.locator(`article[data-case-number="${caseNumber}"]`);
    await expect.poll(() => card.getByTestId('case-ack').textContent()).toBe(' Acknowledged by the ED at 03:12 (Morgan Achterberg)');
    expect(await card.getByTestId('case-bay').textContent()).toBe(' Go to: Resus 2');
    expect(await card.getByTestId('case-state').textContent()).toBe('Acknowledged');
    await screenshot(page, 'pre-alert-phone-acknowledged');
  });

  it('an update is evaluated again on the server; a cancel asks for the reason the ED will read', async () => {
    const { id, case_number: caseNumber } = await server.db('cases').orderBy('id', 'desc').first('id', 'case_number');
    await page.getByRole('tab', { name: /^Open cases/ }).click();
    await page.getByRole('button', { name: `Send an update for case ${caseNumber}` }).click();
    const update = page.getByRole('dialog', { name: `Update for case ${caseNumber}` });
    // The second set of vitals: SBP 128 with the 12 ft fall is moderate risk only [source: Newgard 2022],
    // which the example policy answers with a consult.
    await update.getByLabel('Systolic BP (SBP) (mmHg)', { exact: true }).fill('128');
    await update.getByRole('button', { name: 'Send update' }).click();
    await update.waitFor({ state: 'hidden' });
    expect(await server.db('cases').where({ id }).first('current_revision', 'recommended_level', 'field_risk')).toEqual({ current_revision: 2, recommended_level: 'consult', field_risk: 'moderate' });

    await page.getByRole('button', { name: `Cancel case ${caseNumber}` }).click();
    const cancel = page.getByRole('dialog', { name: `Cancel case ${caseNumber}` });
    await cancel.getByRole('button', { name: 'Cancel the pre-alert' }).click();
    await cancel.getByText(/^Reason /).waitFor();
    expect((await server.db('cases').where({ id }).first('state')).state).not.toBe('cancelled');
    await cancel.getByLabel('Reason').fill('Patient declined transport after reassessment');
    await cancel.getByRole('button', { name: 'Cancel the pre-alert' }).click();
    await cancel.waitFor({ state: 'hidden' });
    expect(await server.db('cases').where({ id }).first('state', 'cancel_reason')).toEqual({ state: 'cancelled', cancel_reason: 'Patient declined transport after reassessment' });
  });

  it('without signal the pre-alert waits on the device, survives a reload, and reaches the server exactly once when the signal is back', async () => {
    await loseSignal();
    await page.getByRole('tab', { name: 'Pre-alert form' }).click();
    await fill('Age (years)', '78');
    await choose('Sex', 'Female');
    await fill('Fall height (ft)', '0');
    await choose('Head struck', 'Yes');
    await choose('Anticoagulants', 'Yes');
    // Ground-level fall at 78 with head strike, on an anticoagulant [source: Newgard 2022] → moderate.
    await expect.poll(() => page.getByTestId('field-risk').textContent()).toBe('Moderate risk');
    const before = await countCases();
    await page.getByRole('button', { name: 'Send pre-alert' }).click();
    await expect.poll(() => page.getByTestId('outbox-state').allTextContents()).toEqual(['Waiting for signal']);
    expect(await connectionText()).toBe('No signal — 1 waiting to send');
    await screenshot(page, 'pre-alert-phone-waiting');

    // The page itself loads again (the network is back) but the socket still cannot get through.
    await context.setOffline(false);
    await page.reload();
    await page.locator('h1').first().waitFor();
    await expect.poll(connectionText).toBe('No signal — 1 waiting to send');
    expect(await page.getByTestId('outbox').locator('strong').allTextContents()).toEqual(['Alderwick General · Medic 11 · 78 y, fall from standing']);
    expect(await countCases()).toBe(before);

    signal = true;
    await expect.poll(connectionText, { timeout: 15_000 }).toBe('Connected');
    await expect.poll(() => page.getByTestId('outbox').count()).toBe(0);
    expect(await countCases()).toBe(before + 1);
    const row = await server.db('cases').orderBy('id', 'desc').first('recommended_level', 'field_risk');
    expect([row.recommended_level, row.field_risk]).toEqual(['consult', 'moderate']);

    // And a further reload sends nothing again.
    await page.reload();
    await expect.poll(connectionText).toBe('Connected');
    await new Promise((resolve) => setTimeout(resolve, 500));
    expect(await countCases()).toBe(before + 1);
    const latest = await server.db('cases').orderBy('id', 'desc').first('case_number');
    await page.getByRole('tab', { name: /^Open cases/ }).click();
    expect(await page.locator(`article[data-case-number="${latest.case_number}"]`).count()).toBe(1);
    await expectAccessible(page, 'New pre-alert after the outbox emptied');
    await screenshot(page, 'pre-alert-phone-delivered');
    expect(errors.filter((e) => !/ERR_INTERNET_DISCONNECTED|WebSocket|socket\.io|net::/.test(e))).toEqual([]);
  });

  it('over the account’s limit, the pre-alert stays on the device and the crew reads why and for how long', async () => {
    // Another device of the same account (a second tablet, say) uses up this minute's pre-alerts.
    const cookie = (await context.cookies(server.url)).map((c) => `${c.name}=${c.value}`).join('; ');
    const other = await connectAs(server.url, { cookieHeader: async () => cookie } as unknown as SignedInClient);
    // A fall from 4 m at 45 [source: Newgard 2022: over 10 ft] → moderate; any valid pre-alert will do.
    const clinical = { ageYears: 45, sex: 'male', fall: { heightM: 4 } };
    for (let i = 0; i < 40; i++) await command(other, 'case:submit', { clientId: randomUUID(), hospitalId: (await server.db('hospitals').first('id')).id, clinical });
    other.close();
    const before = await countCases();

    await page.getByRole('tab', { name: 'Pre-alert form' }).click();
    await fill('Age (years)', '67');
    await choose('Sex', 'Female');
    await fill('Fall height (ft)', '14');
    await page.getByRole('button', { name: 'Send pre-alert' }).click();
    await expect.poll(() => page.getByTestId('outbox-state').allTextContents()).toEqual([expect.stringMatching(/^Held back by the server — next try in \d+ s$/)]);
    expect(await page.getByTestId('outbox-held-back').textContent()).toMatch(/^Too many pre-alerts and updates from your account \(at most 30 a minute\)\. It is kept on this device and sent again in \d+ s\.$/);
    expect(await page.getByRole('button', { name: 'Fix in the form' }).count()).toBe(0);
    expect(await countCases()).toBe(before);
    await expectAccessible(page, 'New pre-alert held back by the rate limit');
    await screenshot(page, 'pre-alert-phone-held-back');
  });

  it('a Send tapped as the screen opens checks the whole draft, sections still to be drawn included, and then every section is there', async () => {
    // The form draws the patient and the Send bar first and the other sections a frame at a time.
    const fresh = await context.newPage();
    try {
      await fresh.goto(new URL('/pre-alert', server.url).href);
      const send = fresh.getByRole('button', { name: 'Send pre-alert' });
      await send.and(fresh.locator(':enabled')).waitFor();
      await send.click();
      const issues = await fresh.locator('#send-issues li').allInnerTexts();
      expect(issues).toEqual(expect.arrayContaining([expect.stringMatching(/^Age is required/), expect.stringMatching(/^Fall height is required/)]));
      for (const heading of ['Patient', 'The fall', 'Vital signs', 'Injuries and concerns', 'Notes']) {
        await fresh.getByRole('heading', { name: heading, exact: true }).waitFor();
      }
      await fresh.getByRole('complementary', { name: 'Live result' }).waitFor();
    } finally {
      await fresh.close();
    }
  });
});
