import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Page } from 'playwright-core';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import { launchBrowser, screenshot, watchForeignRequests } from '../helpers/browser';
import { DEMO_PASSWORD } from '../../server/db/seed-demo';

/**
 * The supply, zone-planning, watering-need and calculator screens in Debian's Chromium, against
 * the real server and a fresh demo database (90 days of invented weather per site).
 */
const DESKTOP = { width: 1280, height: 800 };
const PHONE = { width: 390, height: 844 };

let demo: TestRuntime;
let browser: { context: BrowserContext; close: () => Promise<void> };
const foreign: string[] = [];

beforeAll(async () => {
  demo = await startDemoRuntime();
  browser = await launchBrowser();
});

afterAll(async () => {
  await browser?.close();
  await demo?.close();
});

async function newPage(viewport = DESKTOP): Promise<Page> {
  await browser.context.clearCookies();
  const page = await browser.context.newPage();
  await page.setViewportSize(viewport);
  const seen = watchForeignRequests(page);
  page.on('close', () => foreign.push(...seen));
  return page;
}

async function signIn(page: Page, email: string): Promise<void> {
  await page.goto(`${demo.rt.url}/sign-in`);
  await page.locator('[data-test=sign-in-email]').fill(email);
  await page.locator('[data-test=sign-in-password]').fill(DEMO_PASSWORD);
  await page.locator('[data-test=sign-in-submit]').click();
  await page.waitForURL((u) => u.pathname === '/');
  await page.locator('[data-test=site-name]').first().waitFor();
}

const site = (key: string) => demo.seed.siteIds[key];
const settle = (page: Page) => page.waitForTimeout(400);
const text = async (page: Page, sel: string) => (await page.locator(sel).first().innerText()).trim();

/** A YYYY-MM-DD date `n` days before today (UTC is close enough for days far from today). */
const daysAgo = (n: number) => new Date(Date.now() - n * 86_400_000).toISOString().slice(0, 10);

describe('the planning screens', () => {
  it('lets a technician record a bucket test and read it in metric and US units', async () => {
    const page = await newPage();
    await signIn(page, 'tech@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}/supply`);
    await page.locator('[data-test=supply-test-form]').waitFor();
    expect(await text(page, '[data-test=backflow-note]')).toMatch(/backflow preventer/);

    await page.locator('[data-test=bucket-volume]').fill('5');
    await page.locator('[data-test=bucket-seconds]').fill('10');
    // Shown as it is typed, before anything is sent.
    expect(await text(page, '[data-test=supply-live-flow]')).toBe('30 L/min');
    expect(await text(page, '[data-test=supply-live-usable]')).toBe('24 L/min'); // Larkspur keeps a 20 % margin
    await page.locator('[data-test=supply-note]').fill('Hose bib by the clubhouse');

    const before = await page.locator('[data-test=supply-test-row]').count();
    await page.locator('[data-test=supply-save]').click();
    await page.waitForFunction((n) => document.querySelectorAll('[data-test=supply-test-row]').length === n + 1, before);
    const newest = page.locator('[data-test=supply-test-row]').first();
    expect((await newest.locator('[data-test=supply-test-flow]').innerText()).trim()).toBe('30 L/min');
    expect(await newest.locator('[data-test=supply-test-who]').innerText()).toBe('Kiri Anand');
    expect(await newest.locator('[data-test=supply-test-how]').innerText()).toMatch(/5 L in 10 s/);
    await settle(page);
    await screenshot(page, 'supply-desktop');

    await page.locator('[data-test=units-us]').click();
    await page.waitForFunction(() => /gal\/min/.test(document.querySelector('[data-test=supply-test-flow]')?.textContent ?? ''));
    expect((await newest.locator('[data-test=supply-test-flow]').innerText()).trim()).toMatch(/^7\.9\d? gal\/min$/);
    await page.setViewportSize(PHONE);
    await settle(page);
    await screenshot(page, 'supply-phone');
    // on a phone the unit switch sits in the account menu, not in the header
    expect(await page.locator('header [data-test=units-metric]').count()).toBe(0);
    await page.locator('[data-test=user-menu]').click();
    await page.locator('[data-test=units-metric]').click();
    await page.waitForFunction(() => /L\/min/.test(document.querySelector('[data-test=supply-test-flow]')?.textContent ?? ''));
    await page.keyboard.press('Escape');

    // Technicians record weather, but only managers and admins fetch it from the service.
    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}/watering`);
    await page.locator('[data-test=weather-entry]').waitFor();
    expect(await page.locator('[data-test=entry-tab-service]').count()).toBe(0);
    await page.locator('[data-test=weather-tmax]').fill('31');
    await page.locator('[data-test=weather-tmin]').fill('33');
    expect(await text(page, '[data-test=weather-tmin-error]')).toBe('Tmin must not be above Tmax');
    await page.locator('[data-test=weather-tmin]').fill('14');
    // Solar radiation sits beside sunshine hours, checked like the API checks it.
    await page.locator('[data-test=weather-solar]').fill('60');
    expect(await text(page, '[data-test=weather-solar-error]')).toBe('Solar radiation at most 50 MJ/m²');
    await page.locator('[data-test=weather-solar]').fill('5');
    await page.setViewportSize(DESKTOP);
    await page.locator('[data-test=weather-day-form]').scrollIntoViewIfNeeded();
    await settle(page);
    await screenshot(page, 'weather-form-desktop', { fullPage: false });
    await page.locator('[data-test=weather-save]').click();
    const note = page.locator('.q-notification', { hasText: /Weather for \d{4}-\d{2}-\d{2} saved/ });
    await note.waitFor();
    const day = /(\d{4}-\d{2}-\d{2})/.exec(await note.innerText())![1];
    const stored = await page.request.get(`${demo.rt.url}/api/sites/${site('larkspur')}/weather?from=${day}&to=${day}`);
    const [saved] = ((await stored.json()) as { items: { solarMj: number | null; et0Method: string }[] }).items;
    expect(saved).toMatchObject({ solarMj: 5, et0Method: 'tmin/measured/wind_assumed' });
    await page.setViewportSize(PHONE);
    await page.locator('[data-test=weather-day-form]').scrollIntoViewIfNeeded();
    await settle(page);
    await screenshot(page, 'weather-form-phone', { fullPage: false });
    await page.close();
  });

  it('works out a bucket test, heads, precipitation rate and run time on a phone, offline', async () => {
    const page = await newPage(PHONE);
    await signIn(page, 'tech@runnel.test');
    await page.locator('[data-test=nav-toggle]').click();
    await page.locator('[data-test=nav-calculator]').click();
    await page.locator('[data-test=calc-bucket]').waitFor();
    // Nothing below needs the server.
    await browser.context.setOffline(true);
    try {
      await page.locator('[data-test=calc-bucket-volume]').fill('5');
      await page.locator('[data-test=calc-bucket-seconds]').fill('-1');
      expect(await text(page, '[data-test=calc-bucket-seconds-error]')).toBe('Time to fill must be greater than 0');
      expect(await text(page, '[data-test=calc-bucket-result]')).toBe('—');
      await page.locator('[data-test=calc-bucket-seconds]').fill('10');
      expect(await text(page, '[data-test=calc-bucket-result]')).toBe('30 L/min');

      await page.locator('[data-test=calc-bucket-use]').click();
      await page.locator('[data-test=calc-heads-margin]').fill('0');
      await page.locator('[data-test=calc-heads-per-head]').fill('2');
      expect(await text(page, '[data-test=calc-heads-result]')).toBe('15 heads');

      await page.locator('[data-test=calc-rate-heads]').fill('6');
      await page.locator('[data-test=calc-rate-per-head]').fill('5.5');
      await page.locator('[data-test=calc-rate-area]').fill('95');
      expect(await text(page, '[data-test=calc-rate-result]')).toBe('20.8 mm/h'); // 60 × 33 / 95
      await page.locator('[data-test=calc-rate-use]').click();
      await page.locator('[data-test=calc-run-depth]').fill('10');
      await page.locator('[data-test=calc-run-efficiency]').fill('1.2');
      expect(await text(page, '[data-test=calc-run-efficiency-error]')).toMatch(/^Efficiency must be above 0 and at most 1$/);
      await page.locator('[data-test=calc-run-efficiency]').fill('0.7');
      expect(await text(page, '[data-test=calc-run-result]')).toBe('41 min'); // 60 × (10 / 0.7) / 20.84
    } finally {
      await browser.context.setOffline(false);
    }
    await settle(page);
    await screenshot(page, 'calculator-phone');
    await page.setViewportSize(DESKTOP);
    await settle(page);
    await screenshot(page, 'calculator-desktop');
    await page.close();
  });

  it('shows a manager precipitation rates, warns about a fast pipe, and proposes zones for a list of heads', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}/planning`);
    const row = page.locator('[data-test=plan-zone-row]').filter({ has: page.locator('[data-test=plan-zone-name]', { hasText: /^Front lawn east$/ }) });
    await row.waitFor();
    expect((await row.locator('[data-test=plan-rate]').innerText()).trim()).toBe('20.8 mm/h');
    expect(await text(page, '[data-test=locate-note]')).toMatch(/buried utilities/);

    // A 20 mm pipe is too small for the courtyard rotors (44 L/min → 2.3 m/s).
    await page.locator('[data-test=pipe-diameter]').fill('20');
    const rotors = page.locator('[data-test=plan-zone-row]').filter({ has: page.locator('[data-test=plan-zone-name]', { hasText: /^Courtyard rotors$/ }) });
    await rotors.locator('[data-test=plan-warning-velocity_high]').waitFor();
    expect(await rotors.locator('[data-test=plan-velocity]').innerText()).toMatch(/^2\.3\d? m\/s$/);
    expect(await text(page, '[data-test=plan-warning-summary]')).toMatch(/zones need attention/);

    // Group 20 sprays of 5.5 L/min and 6 rotors of 11 L/min within 60 L/min usable.
    await page.locator('[data-test=group-row-flow]').first().fill('5.5');
    await page.locator('[data-test=group-row-count]').first().fill('20');
    await page.locator('[data-test=group-add-row]').click();
    const second = page.locator('[data-test=group-row]').nth(1);
    await second.locator('[data-test=group-row-type]').click();
    await page.locator('.q-menu .q-item', { hasText: 'Rotor' }).click();
    await second.locator('[data-test=group-row-flow]').fill('11');
    await second.locator('[data-test=group-row-count]').fill('6');
    await page.locator('[data-test=group-propose]').click();
    await page.locator('[data-test=group-result]').waitFor();
    // 10 sprays fit in 60 L/min (2 zones), 5 rotors (2 zones).
    expect(await text(page, '[data-test=group-zone-count]')).toBe('4 zones');
    await settle(page);
    await screenshot(page, 'planning-desktop');
    await page.setViewportSize(PHONE);
    await page.locator('[data-test=plan-zone-card]').first().waitFor();
    await settle(page);
    await screenshot(page, 'planning-phone');
    await page.close();
  });

  it('warns on the planning screen about a spray found on a rotor zone', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}`);
    const zoneRow = page.locator('[data-test=zone-row]').filter({ has: page.locator('[data-test=zone-name]', { hasText: /^Courtyard rotors$/ }) });
    await zoneRow.locator('[data-test=edit-zone]').click();
    const form = page.locator('[data-test=zone-form]');
    await form.waitFor();
    expect(await form.locator('[data-test=zone-mixed-heads]').count()).toBe(0);
    await form.locator('[data-test=zone-field-other-head-type]').click();
    // The zone's own type is not offered as the other one.
    expect(await page.locator('.q-menu .q-item').allInnerTexts()).toEqual(['Spray', 'Drip', 'Bubbler']);
    await page.locator('.q-menu .q-item', { hasText: /^Spray$/ }).click();
    expect(await form.locator('[data-test=zone-mixed-heads]').innerText()).toMatch(/Sprays and rotors on one valve/);
    await settle(page);
    await screenshot(page, 'zone-form-other-head-desktop');
    const saved = page.waitForResponse((r) => r.url().includes('/api/zones/') && r.request().method() === 'PATCH');
    await form.locator('[data-test=form-save]').click();
    const res = await saved;
    expect(res.status()).toBe(200);
    expect(res.request().postDataJSON()).toEqual({ otherHeadType: 'spray' });
    await form.waitFor({ state: 'detached' });

    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}/planning`);
    const rotors = page.locator('[data-test=plan-zone-row]').filter({ has: page.locator('[data-test=plan-zone-name]', { hasText: /^Courtyard rotors$/ }) });
    const warning = rotors.locator('[data-test=plan-warning-mixed_spray_rotor]');
    await warning.waitFor();
    expect((await warning.locator('.warn-title').innerText()).trim()).toBe('Sprays and rotors mixed');
    expect((await rotors.locator('[data-test=plan-head-type]').innerText()).trim()).toBe('Rotor + spray');
    // No other zone is flagged for mixed heads.
    expect(await page.locator('[data-test=plan-warning-mixed_spray_rotor]').count()).toBe(1);
    await settle(page);
    await screenshot(page, 'planning-mixed-desktop');
    await page.setViewportSize(PHONE);
    const card = page.locator('[data-test=plan-zone-card]').filter({ has: page.locator('[data-test=plan-zone-name]', { hasText: /^Courtyard rotors$/ }) });
    await card.locator('[data-test=plan-warning-mixed_spray_rotor]').waitFor();
    await card.scrollIntoViewIfNeeded();
    await settle(page);
    await screenshot(page, 'planning-mixed-phone', { fullPage: false });
    await page.close();
  });

  it('lets an admin mark a site coastal in the site form, with a word on what it changes', async () => {
    const page = await newPage();
    await signIn(page, 'admin@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${site('millbrook')}`);
    await page.locator('[data-test=edit-site]').click();
    const form = page.locator('[data-test=site-form]');
    await form.waitFor();
    const box = form.locator('[data-test=site-field-coastal]');
    expect(await box.getAttribute('aria-checked')).toBe('false');
    expect(await form.locator('#site-coastal-help').innerText()).toMatch(/large body of water: changes the radiation estimate when only temperatures are known/);
    await box.click();
    expect(await box.getAttribute('aria-checked')).toBe('true');
    await box.scrollIntoViewIfNeeded();
    await settle(page);
    await screenshot(page, 'site-form-coastal-desktop', { fullPage: false });
    await page.setViewportSize(PHONE);
    await box.scrollIntoViewIfNeeded();
    await settle(page);
    await screenshot(page, 'site-form-coastal-phone', { fullPage: false });
    const saved = page.waitForResponse((r) => r.url().includes('/api/sites/') && r.request().method() === 'PATCH');
    await form.locator('[data-test=form-save]').click();
    const res = await saved;
    expect(res.status()).toBe(200);
    expect(res.request().postDataJSON()).toEqual({ coastal: true });
    await form.waitFor({ state: 'detached' });
    const back = await page.request.get(`${demo.rt.url}/api/sites/${site('millbrook')}`);
    expect(((await back.json()) as { coastal: boolean }).coastal).toBe(true);
    await page.close();
  });

  it('shows a manager the week of ET₀ and rain as a chart, and the minutes each zone needs', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}/watering`);
    await page.locator('[data-test=weather-chart] canvas').waitFor();
    const rows = page.locator('[data-test=need-zone-row]');
    await rows.first().waitFor();
    expect(await rows.count()).toBe(9);
    // The demo ends in a dry, warm spell: every zone has something to replace.
    for (const m of await page.locator('[data-test=need-minutes]').allInnerTexts()) expect(m.trim()).toMatch(/^\d+(\.\d)? min$/);
    // Clay-loam sprays cannot take it all at once.
    const lawn = rows.filter({ has: page.locator('[data-test=need-zone-name]', { hasText: /^Front lawn east$/ }) });
    expect(await lawn.locator('[data-test=need-cycles]').innerText()).toMatch(/cycles of up to/);
    await settle(page);
    await screenshot(page, 'watering-desktop');
    await page.locator('[data-test=entry-tab-service]').click();
    await page.locator('[data-test=fetch-run]').click();
    expect(await page.locator('[data-test=fetch-result]').innerText()).toMatch(/^Received 7 days, saved 7\./);
    await page.setViewportSize(PHONE);
    await page.locator('[data-test=need-zone-card]').first().waitFor();
    await settle(page);
    await screenshot(page, 'watering-phone');
    await page.close();
  });

  it('checks an uploaded CSV, shows the bad row and saves nothing', async () => {
    const page = await newPage();
    const imports: string[] = [];
    page.on('request', (r) => {
      if (r.url().includes('/weather/import')) imports.push(new URL(r.url()).search);
    });
    await signIn(page, 'manager@runnel.test');
    const id = site('quarry');
    await page.goto(`${demo.rt.url}/sites/${id}/watering`);
    await page.locator('[data-test=entry-tab-csv]').click();
    // Days long before the demo weather, so "nothing saved" is plain to see.
    const [d1, d2, d3] = [daysAgo(200), daysAgo(199), daysAgo(198)];
    const csv = ['date,tmax_c,tmin_c,rain_mm', `${d1},28.5,12.1,0`, `${d2},17,21,0`, `${d3},30.2,14.8,4.5`, ''].join('\n');
    await page.locator('[data-test=weather-csv-file]').setInputFiles({ name: 'week.csv', mimeType: 'text/csv', buffer: Buffer.from(csv) });

    const err = page.locator('[data-test=csv-error-row]');
    await err.first().waitFor();
    expect(await err.count()).toBe(1);
    expect(await err.first().innerText()).toMatch(/^3\s+tmin_c\s+Tmin must not be above Tmax$/);
    expect(await text(page, '[data-test=csv-summary]')).toMatch(/3 rows: 2 ready, 1 problem/);
    expect(await page.locator('[data-test=csv-preview-row]').count()).toBe(2);
    expect(await page.locator('[data-test=csv-save]').isDisabled()).toBe(true);
    expect(imports).toEqual(['?dryRun=1']);

    const stored = await page.request.get(`${demo.rt.url}/api/sites/${id}/weather?from=${d1}&to=${d3}`);
    expect(((await stored.json()) as { items: unknown[] }).items).toEqual([]);
    await settle(page);
    await screenshot(page, 'weather-csv-desktop');
    await page.setViewportSize(PHONE);
    await settle(page);
    await screenshot(page, 'weather-csv-phone');
    await page.close();
  });

  it('lets an owner read the supply history and watering need but not record', async () => {
    const page = await newPage();
    await signIn(page, 'owner@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${site('heron')}/supply`);
    await page.locator('[data-test=supply-history]').waitFor();
    expect(await page.locator('[data-test=supply-test-form]').count()).toBe(0);
    await page.goto(`${demo.rt.url}/sites/${site('heron')}/watering`);
    await page.locator('[data-test=need-zone-row]').first().waitFor();
    expect(await page.locator('[data-test=weather-entry]').count()).toBe(0);
    // Another client's site stays out of reach.
    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}/planning`);
    await page.locator('[data-test=site-missing]').waitFor();
    await page.close();
  });

  it('made no request to any host but 127.0.0.1', () => {
    expect(foreign).toEqual([]);
  });
});
