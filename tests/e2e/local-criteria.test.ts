import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser } from 'playwright-core';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';
import { command, connectAs } from '../support/socket';
import { DESK, collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, screenshot } from './support/browser';

// An administrator writes "fall above 15 ft → full team" in the form, the quality team tries the
// draft on past cases, the trauma lead approves it (ticking the loosening the draft also makes)
// and publishes it, and the board card of the next pre-alert cites the local rule.

/**
 * 40-year-old, fall of 5 m (16.4 ft), normal vitals: above 10 ft, a consult under the example
 * [source: Newgard 2022, 10 ft; SOURCES.md §6 example policy, ours]; above the local 15 ft written here.
 */
const fallOf16ft = {
  ageYears: 40, sex: 'male', anticoagulant: false,
  fall: { heightM: 5, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false },
  vitals: { sbp: 130, hr: 88, rr: 18, spo2: 97, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } },
  findings: [], considerations: [],
};

describeInBrowser('Local criteria in Chromium', () => {
  let server: TestServer;
  let browser: Browser;
  let general: number;
  beforeAll(async () => {
    server = await startTestServer();
    browser = await launchBrowser();
    general = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
  });
  afterAll(async () => {
    await browser?.close();
    await server?.close();
  });

  async function preAlert(): Promise<number> {
    const paramedic = await signIn(server.url, 'paramedic@plumbline.test');
    const socket = await connectAs(server.url, paramedic);
    const answer = await command<{ caseId: number }>(socket, 'case:submit', { clientId: randomUUID(), hospitalId: general, clinical: fallOf16ft });
    socket.close();
    if (!answer.ok) throw new Error(answer.error.message);
    return answer.data.caseId;
  }

  it('fall above 15 ft → full team: written, tried on past cases, approved, published, cited on the board', async () => {
    const past = await preAlert();

    // The administrator writes the rule.
    const { context: adminContext, page } = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/policies', device: DESK });
    const errors = collectPageErrors(page);
    await page.getByRole('button', { name: 'New draft from the shipped example' }).click();
    await page.getByRole('heading', { name: 'Version 1: Draft' }).waitFor();
    await page.getByRole('button', { name: 'Add a local criterion' }).click();
    await page.getByLabel('Label').fill('Fall above 15 ft');
    await page.getByLabel('Reason (required)').fill('Trauma committee minutes, 2 November 2026');
    // The first part starts as a fall height compared with "above"; Alderwick General measures falls in feet.
    await page.getByLabel('Value (ft)').fill('15');
    await page.getByLabel('Value (ft)').blur();
    await page.locator('.read-back').getByText('Fall above 4.6 m (15 ft)').waitFor();
    await page.getByText(/It would have caught \d+ of the hospital's last \d+ pre-alerts/).waitFor();
    const pastNumber = (await server.db('cases').where({ id: past }).first('case_number')).case_number;
    await expect.poll(() => page.locator('.examples').innerText()).toContain(pastNumber);
    await expectAccessible(page, 'Policies, writing a local criterion');
    await screenshot(page, 'local-criterion-form');

    // A rule nothing can meet is named and cannot be added.
    await page.getByLabel('Value (ft)').fill('5000');
    await page.getByLabel('Value (ft)').blur();
    await page.locator('.read-back').getByText('fall above 1524 m (5000 ft): fall must lie between 0 and 3280.839895 ft').waitFor();
    expect(await page.getByRole('button', { name: 'Add to the draft' }).isDisabled()).toBe(true);
    await page.getByLabel('Value (ft)').fill('15');
    await page.getByLabel('Value (ft)').blur();
    await page.locator('.read-back').getByText('Fall above 4.6 m (15 ft)').waitFor();
    await page.getByRole('button', { name: 'Add to the draft' }).click();
    await page.locator('.local-list [data-local="Fall above 15 ft"]').getByText('Fall above 4.6 m (15 ft)').waitFor();
    // And a loosening: suspected pelvic fracture leaves the limited team.
    await page.getByRole('button', { name: 'Remove Suspected pelvic fracture from Limited trauma team' }).click();
    await page.getByRole('button', { name: 'Save draft' }).click();
    await page.getByText('Draft saved').first().waitFor();
    await page.locator('.local-list [data-local="Fall above 15 ft"]').getByText('Local policy of Alderwick General Hospital, version 1').waitFor();
    // The comparison with the version before (the shipped example) shows the new criterion field by field.
    await expect.poll(() => page.locator('.local-diff tr[data-field="Rule"]').innerText()).toBe('Rule\t—\tFall above 4.6 m (15 ft)');
    await page.locator('.warnings').getByText('Suspected pelvic fracture (2021 high-risk) is removed').waitFor();
    await expectAccessible(page, 'Policies, draft with a local criterion');
    await screenshot(page, 'local-criterion-draft');
    expect(errors).toEqual([]);
    await adminContext.close();

    // The quality team tries the draft on past cases.
    const { context: qualityContext, page: quality } = await newSignedInPage(browser, server.url, 'quality@plumbline.test', { path: '/quality', device: DESK });
    await quality.getByRole('tab', { name: 'What-if' }).click();
    await expect.poll(() => quality.getByRole('combobox', { name: 'Policy to try' }).innerText()).toContain('Version 1, draft');
    await quality.getByRole('button', { name: 'Run on past cases' }).click();
    await quality.getByRole('table', { name: 'Side by side' }).waitFor();
    await quality.locator('.local-tried').getByText('Fall above 4.6 m (15 ft) → Full trauma team').waitFor();
    const changed = quality.locator('table.changes').getByRole('row').filter({ hasText: pastNumber });
    await expect.poll(() => changed.innerText()).toContain('Fall above 15 ft');
    expect(await changed.innerText()).toContain('Full trauma team');
    // Beside it, the policy in force now (the shipped example) over the same cases, from the same answer.
    await quality.getByRole('columnheader', { name: 'Recommended by the policy in force now' }).waitFor();
    // The 16 ft fall: a consult at the time and under the example in force now, the full team under the draft.
    expect((await changed.locator('td').allInnerTexts()).filter((t) => t === 'Trauma consult')).toHaveLength(2);
    await expectAccessible(quality, 'What-if with a local criterion');
    await screenshot(quality, 'local-criterion-what-if');
    // The changed case opens.
    await changed.getByRole('link', { name: pastNumber }).click();
    await quality.waitForURL(/\/review\/cases\/\d+/);
    await qualityContext.close();

    // The trauma lead reads the caution and the warning, ticks, approves and publishes.
    const { context: leadContext, page: lead } = await newSignedInPage(browser, server.url, 'lead@plumbline.test', { path: '/policies', device: DESK });
    await lead.getByRole('button', { name: 'Open version 1' }).click();
    await lead.getByRole('heading', { name: 'Version 1: Draft' }).waitFor();
    await lead.getByText("Local criteria are the hospital's responsibility, not the guideline's: the trauma medical director approves them.").waitFor();
    const approve = lead.getByRole('button', { name: 'Approve this version' });
    expect(await approve.isDisabled()).toBe(true);
    await lead.getByLabel('I have read every warning above and approve the loosening on behalf of the trauma programme.').check();
    await expectAccessible(lead, 'Policies, approval with a warning');
    await screenshot(lead, 'local-criterion-approval');
    await approve.click();
    // Each step says what it changes and from when before it is taken.
    await lead.getByRole('alertdialog', { name: 'Approve version 1?' }).getByRole('button', { name: 'Approve version 1' }).click();
    await lead.getByRole('heading', { name: 'Version 1: Approved, not yet published' }).waitFor();
    await lead.getByText('Dr. Sasha Imbert ticked that they read these warnings when approving.').waitFor();
    await lead.getByRole('button', { name: 'Publish' }).click();
    await lead.getByRole('alertdialog', { name: 'Publish version 1?' }).getByRole('button', { name: 'Publish version 1' }).click();
    await lead.getByRole('heading', { name: 'Version 1: In force' }).waitFor();
    await leadContext.close();

    // The next pre-alert's card cites the local rule, among its criteria under "More".
    const next = await preAlert();
    const nextNumber = (await server.db('cases').where({ id: next }).first('case_number')).case_number;
    const { context: nurseContext, page: board } = await newSignedInPage(browser, server.url, 'nurse@plumbline.test', { path: '/board', device: DESK });
    await board.getByRole('button', { name: `More actions and details for case ${nextNumber}` }).click();
    const cited = board.getByText('Local policy of Alderwick General Hospital, version 1. Reason: Trauma committee minutes, 2 November 2026');
    await expect.poll(() => cited.count()).toBeGreaterThan(0);
    await expectAccessible(board, 'Board with a local criterion');
    await screenshot(board, 'local-criterion-board');
    await nurseContext.close();
  }, 240_000);
});
