import { randomUUID } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';
import { loadMe } from '../../server/auth/guards';
import { submitPreAlert } from '../../server/services/cases/commands';
import { OUTCOME_COLUMN_NAMES } from '../../shared/schemas/quality';
import { EXAMPLE_POLICY } from '../../shared/triage/policy';
import { collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, screenshot } from './support/browser';

// The quality team's month: download the template, upload outcomes with one bad row, see the
// error, upload the corrected file, save, and read a matrix that matches the hand count; then
// try a stricter draft policy on the same cases.
// Hand count (ISS > 15 major [source: Baker 1974]; Cribari [source: ACS-COT method]):
//   a = #1 (full, ISS 25)  b = #2 (full, ISS 9)  c = #3 (consult, ISS 17)  d = #4, #5 (none, ISS 4 and 1)
//   over-triage b/(a+b) = 1/2 = 50.0 %, under-triage c/(c+d) = 1/3 = 33.3 %.

const vitals = { sbp: 130, hr: 80, rr: 16, spo2: 98, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 }, intubated: false, respiratorySupport: false, respiratoryDistress: false };
const patient = (heightM: number, v: object = {}) => ({
  ageYears: 40, sex: 'male', anticoagulant: false, pregnancyWeeks: null,
  fall: { heightM, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false },
  vitals: { ...vitals, ...v }, findings: [], considerations: [],
});
const FULL = patient(0, { sbp: 80, hr: 70 }); // SBP < 90 at 40 → full under the example [ours, SOURCES.md §6]
const CONSULT = patient(4); // fall > 10 ft → consult
const NONE = patient(1);
const FIXTURES = [
  { clinical: FULL, day: '2031-01-05', decided: 'full', iss: 25 },
  { clinical: FULL, day: '2031-01-15', decided: 'full', iss: 9 },
  { clinical: CONSULT, day: '2031-01-20', decided: 'consult', iss: 17 },
  { clinical: NONE, day: '2031-02-03', decided: 'none', iss: 4 },
  { clinical: NONE, day: '2031-02-10', decided: 'none', iss: 1 },
];

describeInBrowser('Triage quality in Chromium', () => {
  let server: TestServer;
  let browser: Browser;
  let page: Page;
  let errors: string[];
  const numbers: string[] = [];
  const ids: number[] = [];
  let now = Date.now();
  let general = 0;
  let draftId = 0;

  beforeAll(async () => {
    server = await startTestServer({}, { clock: { now: () => now } });
    general = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
    const paramedic = (await server.db('users').where({ email: 'paramedic@plumbline.test' }).first('id')).id;
    const me = (await loadMe(server.db, paramedic))!;
    for (const f of FIXTURES) {
      now = Date.parse(`${f.day}T10:00:00Z`);
      const { caseId } = await submitPreAlert(server.db, { now: () => now }, { me, role: 'paramedic' }, { clientId: randomUUID(), hospitalId: general, clinical: f.clinical as never });
      // The board's decide and close steps, set directly: this test is about the quality screen.
      await server.db('cases').where({ id: caseId }).update({ decided_level: f.decided, state: 'closed' });
      ids.push(caseId);
      numbers.push((await server.db('cases').where({ id: caseId }).first('case_number')).case_number);
    }
    now = Date.now();
    // A stricter draft for the what-if: SBP < 90 alone no longer calls the full team.
    const admin = await signIn(server.url, 'admin@plumbline.test');
    const draft = await (await admin.send('POST', '/api/policies', { hospitalId: general, from: 'example' })).json();
    draftId = draft.id;
    const rules = draft.document.rules.map((r: { level: string; criteria: string[] }) => (r.level === 'full' ? { ...r, criteria: r.criteria.filter((id) => id !== 'policy:sbp-below-90-age-10-up') } : r));
    expect((await admin.send('PUT', `/api/policies/${draft.id}`, { name: 'Stricter full team', levels: draft.document.levels, rules })).status).toBe(200);

    browser = await launchBrowser();
    ({ page } = await newSignedInPage(browser, server.url, 'quality@plumbline.test', { path: '/quality' }));
    errors = collectPageErrors(page);
  });
  afterAll(async () => {
    await browser?.close();
    await server?.close();
  });

  const csvOf = (issOfThird: number) =>
    `case_number,iss,disposition\n${FIXTURES.map((f, i) => `${numbers[i]},${i === 2 ? issOfThird : f.iss},home`).join('\n')}\n`;

  async function chooseFile(csv: string, name: string): Promise<void> {
    await page.getByLabel('Registry CSV file').setInputFiles({ name, mimeType: 'text/csv', buffer: Buffer.from(csv) });
    await page.getByRole('button', { name: 'Check the file' }).click();
  }

  it('downloads the template, sees the bad row, corrects it, saves and reads the matrix of the hand count', async () => {
    await page.getByRole('heading', { name: 'Triage quality', level: 1 }).waitFor();
    await page.getByRole('tab', { name: 'Import outcomes' }).click();

    const [download] = await Promise.all([page.waitForEvent('download'), page.getByRole('link', { name: 'Download the template CSV' }).click()]);
    expect(download.suggestedFilename()).toBe('registry-outcomes-template.csv');
    expect(readFileSync((await download.path())!, 'utf8').split('\r\n')[0]).toBe(OUTCOME_COLUMN_NAMES.join(','));

    // Row 4 of the file (the third case) carries ISS 7, which no set of injuries can give.
    await chooseFile(csvOf(7), 'registry-january.csv');
    const problems = page.getByRole('table', { name: 'Problems in the file' });
    await problems.waitFor();
    expect(await problems.locator('tbody tr').allInnerTexts()).toEqual(['4\tiss\t7 cannot be a score: it is not a sum of three AIS squares (check for a typing slip)']);
    await page.getByText('Nothing has been saved.').waitFor();
    expect(await page.getByRole('button', { name: /^Save/ }).count()).toBe(0);
    expect(await page.getByRole('table', { name: 'Rows as they will be saved' }).locator('tr.bad').innerText()).toBe(`4\t${numbers[2]}\t—\t—\t—\t—\tHas a problem`);
    expect(Number((await server.db('outcomes').whereIn('case_id', ids).count({ n: '*' }).first())!.n)).toBe(0);
    await expectAccessible(page, 'Import with a row error');
    await screenshot(page, 'quality-import-error');

    await chooseFile(csvOf(17), 'registry-january-corrected.csv');
    await page.getByRole('heading', { name: 'Check of registry-january-corrected.csv' }).waitFor();
    expect(await problems.count()).toBe(0);
    await page.getByRole('button', { name: 'Save 5 outcomes' }).click();
    await page.getByText('Saved 5 outcomes: 5 new, 0 updated.').waitFor();
    await screenshot(page, 'quality-import-saved');

    await page.getByRole('tab', { name: 'Report' }).click();
    await page.getByLabel('To month').fill('2031-02');
    await page.getByLabel('From month').fill('2031-01');
    await expect.poll(() => page.locator('.coverage').textContent()).toContain('5 cases in the period, 5 with a registry outcome.');
    const matrix = page.getByRole('table', { name: 'Activation as decided (recommended when undecided)' });
    const cell = async (c: string) => (await matrix.locator(`[data-cell="${c}"]`).innerText()).replace(/\s+/g, ' ');
    expect(await Promise.all(['a', 'b', 'c', 'd'].map(cell))).toEqual([
      'a 1 cases: full activation, major trauma. Show them',
      'b 1 cases: full activation, not major (over-triage). Show them',
      'c 1 cases: not full activation, major trauma (under-triage). Show them',
      'd 2 cases: not full activation, not major. Show them',
    ]);
    expect(await page.locator('[data-rate="over"] .value').innerText()).toBe('50.0 %');
    expect(await page.locator('[data-rate="under"] .value').innerText()).toBe('33.3 %');
    await page.locator('canvas[role="img"]').first().waitFor();
    await expectAccessible(page, 'Report');
    await screenshot(page, 'quality-report');

    // The under-triaged case opens from cell c and links to its review timeline.
    await matrix.locator('[data-cell="c"] button').click();
    const dialog = page.getByRole('dialog', { name: 'Cases under-triaged: not full, major trauma (c)' });
    await dialog.getByText('1 case.').waitFor();
    expect(await dialog.getByRole('link', { name: 'Under-triaged: review the timeline' }).getAttribute('href')).toBe(`/review/cases/${ids[2]}`);
    await expectAccessible(page, 'Drill-down');
    await screenshot(page, 'quality-drilldown');
    await page.keyboard.press('Escape');
    await dialog.waitFor({ state: 'hidden' });
  });

  it('the stricter draft shows fewer full activations and the under-triage it would cause', async () => {
    await page.getByRole('tab', { name: 'What-if' }).click();
    await expect.poll(() => page.getByRole('combobox', { name: 'Policy to try' }).innerText()).toContain('Stricter full team');
    await page.getByRole('button', { name: 'Run on past cases' }).click();
    const compare = page.getByRole('table', { name: 'Side by side' });
    await compare.waitFor();
    // Columns: decided, recommended at the time, the policy in force now (still the example), the tried draft.
    expect(await compare.locator('[data-level="full"]').innerText()).toBe('Full trauma team\t2\t2\t2\t0');
    // #1 (ISS 25) and #2 (ISS 9) lose the full team: c 1 → 2, d 2 → 3, under-triage 1/3 → 2/5.
    expect(await compare.locator('[data-cell="c"]').innerText()).toBe('Cribari c · not full, major\t1\t1\t1\t2');
    // Each rate with its 95 % Wilson score interval (1/3 → 6.1–79.2 %, 2/5 → 11.8–76.9 %) [source: Wilson EB, J Am Stat Assoc 1927].
    expect(await compare.locator('[data-rate="under"] td').allInnerTexts()).toEqual(['33.3 %\n95 % CI 6.1–79.2 %', '33.3 %\n95 % CI 6.1–79.2 %', '33.3 %\n95 % CI 6.1–79.2 %', '40.0 %\n95 % CI 11.8–76.9 %']);
    await page.getByText('The level would change for 2 (0 higher, 2 lower).').waitFor();
    expect(await page.getByText('would be under-triaged').count()).toBe(1);
    await expectAccessible(page, 'What-if');
    await screenshot(page, 'quality-what-if');
    expect(errors).toEqual([]);
  });

  it('the quality team sets a committee-approved target; a range upside down is refused by name; the report reads against the new one', async () => {
    await page.getByRole('tab', { name: 'Targets' }).click();
    // The shipped under-triage target: below 5 % [source: Mohan D et al., Arch Surg 2011].
    const under = page.getByLabel('Under-triage below (%)');
    await expect.poll(() => under.inputValue()).toBe('5');
    await page.getByLabel('Over-triage for a hospital, from (%)').fill('40');
    await page.getByLabel('Over-triage for a hospital, to (%)').fill('30');
    await page.getByRole('button', { name: 'Save the targets' }).click();
    await page.getByRole('alert').filter({ hasText: 'Over-triage range for a hospital the lower bound must not be above the upper bound' }).waitFor();
    await page.getByLabel('Over-triage for a hospital, from (%)').fill('25');
    await under.fill('10');
    await page.getByRole('button', { name: 'Save the targets' }).click();
    await page.getByText('Targets saved; the report now reads against them').waitFor();
    await expectAccessible(page, 'Targets');
    await page.getByRole('tab', { name: 'Report' }).click();
    await expect.poll(() => page.locator('[data-rate="under"] .target').innerText()).toBe('Target: below 10.0 %');
    expect(await page.locator('[data-rate="over"] .target').innerText()).toBe('Target: 25.0 %–30.0 % for a hospital, below 50.0 % for a system');
    expect(errors).toEqual([]);
  });

  it('shows the level names of the hospital\'s own policy in force, not the example\'s', async () => {
    // Each hospital names its own levels (SOURCES.md §6) [ours]: a local policy, drafted by the
    // administrator, approved by the trauma lead and published through the real screens' routes.
    const admin = await signIn(server.url, 'admin@plumbline.test');
    const lead = await signIn(server.url, 'lead@plumbline.test');
    // The stricter draft of the what-if above, renamed and given the example's rules back.
    const draft = await (await admin.get(`/api/policies/${draftId}`)).json();
    const names: Record<string, string> = { full: 'Trauma call red', limited: 'Trauma call amber', consult: 'Surgical opinion', none: 'Usual ED care' };
    const levels = draft.document.levels.map((l: { id: string }) => ({ ...l, name: names[l.id] }));
    expect((await admin.send('PUT', `/api/policies/${draft.id}`, { name: 'Alderwick local levels', levels, rules: EXAMPLE_POLICY.rules })).status).toBe(200);
    expect((await lead.send('POST', `/api/policies/${draft.id}/approve`)).status).toBe(200);
    expect((await admin.send('POST', `/api/policies/${draft.id}/publish`, {})).status).toBe(200);

    await page.reload();
    await page.getByRole('tab', { name: 'Report' }).click();
    await page.getByLabel('To month').fill('2031-02');
    await page.getByLabel('From month').fill('2031-01');
    await expect.poll(() => page.locator('.coverage').textContent()).toContain('5 cases in the period');
    const matrix = page.getByRole('table', { name: 'Activation as decided (recommended when undecided)' });
    await expect.poll(() => matrix.getByRole('rowheader').first().innerText()).toBe('Full activation (Trauma call red)');
    await matrix.locator('[data-cell="c"] button').click();
    const dialog = page.getByRole('dialog', { name: 'Cases under-triaged: not full, major trauma (c)' });
    await dialog.getByText('1 case.').waitFor();
    // #3 was recommended and decided at the consult level: the local name for it on both.
    expect(await dialog.getByRole('row').nth(1).innerText()).toMatch(/\tSurgical opinion\tSurgical opinion\t/);
    expect(await page.locator('body').innerText()).not.toContain('Trauma consult');
    await expectAccessible(page, 'Drill-down with local level names');
    await screenshot(page, 'quality-local-level-names');
    await page.keyboard.press('Escape');
    expect(errors).toEqual([]);
  });
});
