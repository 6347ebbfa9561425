import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { Browser, Page } from 'playwright-core';
import { startTestServer, type TestServer } from '../support/server';
import { collectPageErrors, describeInBrowser, expectAccessible, launchBrowser, newSignedInPage, PHONE } from './support/browser';

// The administrator's screens: each tab of People & places checked with axe-core, a hospital's
// time zone and escalation steps edited and audited, and a deactivation asked about by name.

const SIZES = [
  { width: 390, height: 844 },
  { width: 1280, height: 800 },
  { width: 1366, height: 768 },
  { width: 1920, height: 1080 },
];

async function shot(page: Page, name: string): Promise<void> {
  mkdirSync(join('tests', 'e2e', 'screenshots'), { recursive: true });
  await page.screenshot({ path: join('tests', 'e2e', 'screenshots', `${name}.png`) });
}

describeInBrowser('People & places in Chromium', () => {
  let server: TestServer;
  let browser: Browser;
  let general: number;
  const errors: string[] = [];

  beforeAll(async () => {
    server = await startTestServer();
    browser = await launchBrowser();
    general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
  });
  afterAll(async () => {
    await browser?.close();
    await server?.close();
  });

  it('every tab passes axe-core; the navigation fits on one line at 1280 px', async () => {
    const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/people', device: { viewport: { width: 1280, height: 800 } } as never });
    const page = admin.page;
    errors.push(...collectPageErrors(page));
    const links = page.getByRole('navigation', { name: 'Screens' }).getByRole('link');
    await links.first().waitFor();
    const tops = await links.evaluateAll((all) => all.map((a) => Math.round(a.getBoundingClientRect().top)));
    expect(tops.length).toBeGreaterThan(3);
    expect(new Set(tops).size, `navigation rows at ${tops.join(', ')}`).toBe(1);
    for (const tab of ['People', 'Hospitals', 'Ambulance agencies', 'Paging', 'Machine clients', 'Bays']) {
      await page.getByRole('tab', { name: tab, exact: true }).click();
      await expect.poll(() => page.getByRole('tab', { name: tab, exact: true }).getAttribute('aria-selected')).toBe('true');
      await expectAccessible(page, `People & places, ${tab}`);
    }
    await shot(page, 'i17b-people-bays-1280');
    await admin.context.close();
  });

  it('an administrator sets a hospital’s time zone and escalation steps; a made-up step order is refused', async () => {
    const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/people', device: { viewport: { width: 1280, height: 800 } } as never });
    const page = admin.page;
    errors.push(...collectPageErrors(page));
    await page.getByRole('tab', { name: 'Hospitals', exact: true }).click();
    const form = page.getByRole('form', { name: 'Alderwick General Hospital' });
    await form.getByRole('combobox', { name: 'Time zone of pages and notices' }).click();
    await page.getByRole('searchbox').or(page.locator('.p-select-filter')).first().fill('Europe/Lon');
    await page.getByRole('option', { name: 'Europe/London', exact: true }).click();
    await form.getByRole('button', { name: 'Add a step' }).click();
    await form.getByLabel('Step 3: after × minutes').fill('3');
    await form.getByRole('combobox', { name: 'Step 3: tell' }).click();
    await page.getByRole('option', { name: 'Paged for the full team' }).click();
    await expectAccessible(page, 'People & places, hospital escalation steps');
    await shot(page, 'i17b-hospital-escalation-1280');
    await form.getByRole('button', { name: 'Save Alderwick General' }).click();
    await expect.poll(async () => (await server.db('settings').where({ hospital_id: general, key: 'escalation.laterSteps' }).first('value'))?.value).toBe(JSON.stringify([{ times: 2, list: 'senior' }, { times: 3, list: 'full' }]));
    expect(JSON.parse((await server.db('settings').where({ hospital_id: general, key: 'hospital.timeZone' }).first('value')).value)).toBe('Europe/London');
    const audit = await server.db('audit_log').where({ entity: 'hospital', entity_id: String(general), action: 'hospital.updated' }).orderBy('id', 'desc').first('after');
    expect(JSON.parse(audit.after)).toMatchObject({ timeZone: 'Europe/London' });

    // Step 3 earlier than step 2: the server names the field and nothing is saved.
    await form.getByLabel('Step 3: after × minutes').fill('1.5');
    await form.getByRole('button', { name: 'Save Alderwick General' }).click();
    await expect.poll(() => form.getByRole('alert').innerText()).toContain('escalationLaterSteps[1].times');
    expect(JSON.parse((await server.db('settings').where({ hospital_id: general, key: 'escalation.laterSteps' }).first('value')).value)).toEqual([{ times: 2, list: 'senior' }, { times: 3, list: 'full' }]);
    await admin.context.close();
  });

  it('deactivating a person asks first, naming them; keeping them changes nothing', async () => {
    const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/people', device: PHONE });
    const page = admin.page;
    errors.push(...collectPageErrors(page));
    const nurse = await server.db('users').where({ email: 'nurse@plumbline.test' }).first('id', 'name');
    const row = page.getByRole('row').filter({ hasText: 'nurse@plumbline.test' });
    await row.getByRole('button', { name: `Deactivate ${nurse.name}` }).click();
    const dialog = page.getByRole('alertdialog').or(page.getByRole('dialog')).first();
    await expect.poll(() => dialog.innerText()).toContain(`Deactivate ${nurse.name}?`);
    expect(await dialog.innerText()).toContain('nurse@plumbline.test');
    await expectAccessible(page, 'Deactivation confirmation on a phone');
    // On a 390 px phone the title clears the close button.
    const title = await dialog.locator('.p-dialog-title, .p-confirmdialog-title').first().boundingBox();
    const close = await dialog.locator('.p-dialog-close-button, button[aria-label="Close"]').first().boundingBox();
    expect(title && close, 'title and close button').toBeTruthy();
    expect(title!.x + title!.width <= close!.x || title!.y + title!.height <= close!.y).toBe(true);
    await shot(page, 'i17b-deactivate-confirm-390');
    await dialog.getByRole('button', { name: 'Keep them active' }).click();
    expect((await server.db('users').where({ id: nurse.id }).first('active')).active).toBeTruthy();
    await row.getByRole('button', { name: `Deactivate ${nurse.name}` }).click();
    await dialog.getByRole('button', { name: `Deactivate ${nurse.name}`, exact: true }).click();
    await expect.poll(async () => Boolean((await server.db('users').where({ id: nurse.id }).first('active')).active)).toBe(false);
    // The toast fits on the phone's screen.
    const toast = page.locator('.p-toast-message').first();
    await toast.waitFor();
    const box = await toast.boundingBox();
    expect(box!.x).toBeGreaterThanOrEqual(0);
    expect(box!.x + box!.width).toBeLessThanOrEqual(390);
    await shot(page, 'i17b-deactivated-toast-390');
    await admin.context.close();
    expect(errors).toEqual([]);
  });

  it('the hospitals tab fits the width at each size, with no sideways scrolling', async () => {
    for (const size of SIZES) {
      const admin = await newSignedInPage(browser, server.url, 'admin@plumbline.test', { path: '/people', device: { viewport: size } as never });
      await admin.page.getByRole('tab', { name: 'Hospitals', exact: true }).click();
      await admin.page.getByRole('button', { name: 'Save Alderwick General' }).waitFor();
      const widest = await admin.page.evaluate(() => Array.from(document.querySelectorAll('main *')).filter((e) => e.getBoundingClientRect().right > window.innerWidth && !e.closest('.p-tablist')).slice(0, 3).map((e) => `${e.tagName}.${e.className}`).join(' | '));
      expect(await admin.page.evaluate(() => document.documentElement.scrollWidth), `${size.width} px: ${widest}`).toBeLessThanOrEqual(size.width);
      await shot(admin.page, `i17b-people-hospitals-${size.width}`);
      await admin.context.close();
    }
  }, 120_000);
});
