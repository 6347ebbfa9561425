import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser } from 'playwright-core';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';
import { command, connectAs } from '../support/socket';
import { collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, screenshot } from './support/browser';

// The administrator drafts a stricter policy in the browser, the trauma lead approves and
// publishes it, and the next pre-alert is evaluated under it while the earlier one keeps its own.
// The New pre-alert form is still being built, so the pre-alerts go over the same socket command
// the form will use, on a paramedic's real session.

/** 72-year-old, fall from standing, on an anticoagulant: a trauma consult under the example. */
const clinical = {
  ageYears: 72, sex: 'female', anticoagulant: true,
  fall: { heightM: 0, surface: 'tile-stone', firstImpact: 'side', headImpact: false },
  vitals: { sbp: 140, hr: 80, rr: 16, spo2: 97, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } },
  findings: [], considerations: [],
};

describeInBrowser('Policies in Chromium', () => {
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

  async function preAlert(): Promise<{ id: string; version: number }> {
    const paramedic = await signIn(server.url, 'paramedic@plumbline.test');
    const hospitalId = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
    const socket = await connectAs(server.url, paramedic);
    const answer = await command<{ caseId: number }>(socket, 'case:submit', { clientId: randomUUID(), hospitalId, clinical });
    socket.close();
    if (!answer.ok) throw new Error(answer.error.message);
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    const detail = await (await nurse.get(`/api/cases/${answer.data.caseId}`)).json();
    return { ...detail.case.policy, level: detail.case.recommendedLevel, caseId: answer.data.caseId };
  }

  it('an admin drafts a stricter policy, the trauma lead approves and publishes it, and the next pre-alert carries it', async () => {
    const before = await preAlert();
    expect(before).toMatchObject({ id: 'example-tiered', version: 1, level: 'consult' });

    const { context: adminContext, page } = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/policies' });
    const errors = collectPageErrors(page);
    await expect.poll(() => page.getByText('Example — needs local review and approval.').count()).toBe(1);
    await expectAccessible(page, 'Policies, example in force');
    await screenshot(page, 'policies-example');

    await page.getByRole('button', { name: 'New draft from the shipped example' }).click();
    await page.getByRole('heading', { name: 'Version 1: Draft' }).waitFor();
    await page.getByRole('button', { name: 'Remove Anticoagulant use from Trauma consult' }).click();
    await page.getByRole('combobox', { name: 'Add a criterion to Limited trauma team' }).click();
    await page.getByRole('searchbox').fill('Anticoagulant use');
    await page.getByRole('option', { name: 'Anticoagulant use (2021 guideline)' }).click();
    await page.locator('[data-level="limited"]').getByRole('button', { name: 'Add', exact: true }).click();
    await expect.poll(() => page.locator('[data-level="limited"]').getByText('Anticoagulant use', { exact: true }).count()).toBe(1);
    await page.getByRole('button', { name: 'Save draft' }).click();
    await page.getByText('Draft saved').first().waitFor();
    await expectAccessible(page, 'Policies, draft open');
    await screenshot(page, 'policies-draft');
    expect(await page.getByRole('button', { name: 'Approve this version' }).count()).toBe(0);
    expect(errors).toEqual([]);
    await adminContext.close();

    const { context: leadContext, page: leadPage } = await newSignedInPage(browser, server.url, 'lead@plumbline.test', { path: '/policies' });
    await leadPage.getByRole('button', { name: 'Open version 1' }).click();
    await leadPage.getByRole('heading', { name: 'Version 1: Draft' }).waitFor();
    expect(await leadPage.getByRole('button', { name: 'Save draft' }).count()).toBe(0);
    await leadPage.getByRole('button', { name: 'Approve this version' }).click();
    // Each step says what changes and from when before it happens.
    const approveAsk = leadPage.getByRole('alertdialog', { name: 'Approve version 1?' });
    await expect.poll(() => approveAsk.textContent()).toContain('takes effect only once it is published');
    await expectAccessible(leadPage, 'Policies, approve confirmation');
    await approveAsk.getByRole('button', { name: 'Approve version 1' }).click();
    await leadPage.getByRole('heading', { name: 'Version 1: Approved, not yet published' }).waitFor();
    expect(await leadPage.getByText('Approved by Dr. Sasha Imbert').count()).toBe(1);
    await leadPage.getByRole('button', { name: 'Publish' }).click();
    const publishAsk = leadPage.getByRole('alertdialog', { name: 'Publish version 1?' });
    await expect.poll(() => publishAsk.textContent()).toMatch(/From now, every new pre-alert to Alderwick General Hospital is evaluated under version 1/);
    await expectAccessible(leadPage, 'Policies, publish confirmation');
    await publishAsk.getByRole('button', { name: 'Publish version 1' }).click();
    await leadPage.getByRole('heading', { name: 'Version 1: In force' }).waitFor();
    await expect.poll(() => leadPage.getByRole('status').filter({ hasText: 'In force now' }).textContent()).toContain('version 1 (alderwick-general-activation)');
    expect(await leadPage.getByText('Example — needs local review and approval.').count()).toBe(0);
    // The comparison against the shipped example names the moved criterion on both sides.
    await leadPage.getByRole('combobox', { name: 'Before' }).click();
    await leadPage.getByRole('option', { name: 'Shipped example' }).click();
    const diff = leadPage.locator('.diff-table');
    await expect.poll(() => diff.locator('tr[data-level="limited"] .added').textContent()).toBe('Added: Anticoagulant use');
    await expect.poll(() => diff.locator('tr[data-level="consult"] .removed').textContent()).toBe('Removed: Anticoagulant use');
    await leadPage.locator('.p-select-overlay').waitFor({ state: 'detached' });
    await expectAccessible(leadPage, 'Policies, published');
    await screenshot(leadPage, 'policies-published');
    await leadContext.close();

    const after = await preAlert();
    expect(after).toMatchObject({ id: 'alderwick-general-activation', version: 1, level: 'limited' });
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    const old = await (await nurse.get(`/api/cases/${(before as unknown as { caseId: number }).caseId}`)).json();
    expect(old.case.policy).toEqual({ id: 'example-tiered', version: 1, example: true });
  });

  it('People & places passes axe on each tab, and a hospital’s response target is set on its card', async () => {
    const { context, page } = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/people' });
    await page.getByRole('cell', { name: 'Dr. Sasha Imbert', exact: true }).waitFor();
    await expectAccessible(page, 'People');
    await screenshot(page, 'people-people');
    await page.getByRole('tab', { name: 'Hospitals' }).click();
    await page.getByLabel('Paged for the full team').first().waitFor();
    await expectAccessible(page, 'Hospitals');
    await screenshot(page, 'people-hospitals');
    // The response standard the review screen measures against, set on the hospital's card: the
    // shipped 15 minutes for 80 % (SOURCES.md §5) changed to a local 20 minutes for 75 %.
    const general = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
    const minutes = page.locator(`#h${general}-target-minutes`);
    await expect.poll(() => minutes.inputValue()).toBe('15');
    expect(await page.locator(`#h${general}-target-share`).inputValue()).toBe('80');
    const save = page.getByRole('button', { name: 'Save the response target of Alderwick General' });
    await minutes.fill('');
    await save.click();
    await page.getByRole('alert').filter({ hasText: 'Minutes from arrival must be a number of minutes' }).waitFor();
    await minutes.fill('20');
    await page.locator(`#h${general}-target-share`).fill('75');
    await save.click();
    await page.getByText('Alderwick General: response target saved').waitFor();
    const lead = await signIn(server.url, 'lead@plumbline.test');
    expect(await (await lead.get(`/api/review/settings?hospitalId=${general}`)).json()).toEqual({ hospitalId: general, targetMinutes: 20, compliance: 0.75 });
    await page.getByRole('tab', { name: 'Ambulance agencies' }).click();
    await page.getByText('Medic 11').waitFor();
    await expectAccessible(page, 'Agencies');
    await screenshot(page, 'people-agencies');
    await context.close();
  });
});
