import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Page } from 'playwright-core';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import path from 'node:path';
import { launchBrowser, screenshot, SCREENSHOT_DIR, watchForeignRequests } from '../helpers/browser';
import { until } from '../helpers/live';
import { DEMO_PASSWORD, demoSites } from '../../server/db/seed-demo';
import { provisionBoards } from '../../server/services/device-secrets';
import { startSimulator, type Simulator } from '../../simulator/fleet';

/**
 * Programs, the 7-day schedule, rain delays and the walk test in Debian's Chromium, against the
 * real server, its embedded broker and simulated boards, on a fresh demo database.
 */
const siteName = Object.fromEntries(demoSites.map((s) => [s.key, s.name])) as Record<string, string>;
const DESKTOP = { width: 1280, height: 800 };
const PHONE = { width: 390, height: 844 };
const CLUBHOUSE = 'FHG-LC-0101';

let demo: TestRuntime;
let sim: Simulator;
let browser: { context: BrowserContext; close: () => Promise<void> };
const foreign: string[] = [];

beforeAll(async () => {
  demo = await startDemoRuntime({ ACK_TIMEOUT_MS: '800', COMMAND_RETRIES: '1' });
  const boards = await provisionBoards(demo.rt.dbh.db);
  await demo.rt.services.fleet.load();
  sim = await startSimulator({ brokerUrl: demo.rt.mqttUrl!, boards: boards as never, seed: 2, sampleIntervalMs: 500, controlPort: 0 });
  await sim.ready();
  demo.rt.services.demo.simulatorUrl = sim.controlUrl;
  browser = await launchBrowser();
});

afterAll(async () => {
  await browser?.close();
  await sim?.close();
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
  await page.locator('[data-test=live-indicator][data-state=live]').waitFor();
}

async function openSite(page: Page, name: string): Promise<void> {
  await page.locator('[data-test=site-name]', { hasText: name }).first().click();
  await page.locator('[data-test=site-title]', { hasText: name }).waitFor();
}

/** Let transitions settle and scroll up, so the fixed header sits at the top of a full-page picture. */
async function settle(page: Page): Promise<void> {
  await page.evaluate(() => window.scrollTo(0, 0));
  await page.waitForTimeout(400);
}

/** A picture of the page without the passing notices, which would hide the header. */
async function shot(page: Page, name: string): Promise<void> {
  const style = await page.addStyleTag({ content: '.q-notifications { visibility: hidden !important; }' });
  await screenshot(page, name);
  await style.evaluate((e) => (e as unknown as { remove: () => void }).remove());
}

/** A full-screen dialog is as tall as the screen: picture the screen, not the page behind it. */
async function screenShot(page: Page, name: string): Promise<void> {
  await page.screenshot({ path: path.join(SCREENSHOT_DIR, `${name}.png`), fullPage: false, style: '.q-notifications { visibility: hidden !important; }' });
}

/** Nothing sticks out sideways on a phone. */
async function expectNoSideScroll(page: Page): Promise<void> {
  const [scroll, client] = await page.evaluate(() => [document.documentElement.scrollWidth, document.documentElement.clientWidth]);
  expect(scroll, 'the page fits the phone screen').toBeLessThanOrEqual(client);
}

const text = async (page: Page, sel: string) => (await page.locator(sel).first().innerText()).trim();
const site = (key: string) => demo.seed.siteIds[key];

describe('programs, schedule and walk test', () => {
  it('lets a manager write a program, see it on the week ahead with litres per day, and hold watering for 2 h', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await openSite(page, siteName.larkspur);
    await page.locator('[data-test=site-tab-programs]').click();
    await page.locator('[data-test=programs-list]').waitFor();
    expect(await page.locator('[data-test=program-card]').count()).toBe(2); // the demo site's two programs
    const early = page.locator('[data-test=program-card][data-program="Early lawns"]');
    expect(await early.locator('[data-test=program-days]').innerText()).toBe('Mon, Wed, Fri and Sat');
    expect(await early.locator('[data-test=program-mode]').innerText()).toBe('Set minutes at 90 %');
    expect(await early.locator('[data-test=program-next] li').count()).toBeGreaterThan(0);
    await settle(page);
    await shot(page, 'programs-desktop');

    // A start inside the site's no-watering hours (10:00–18:00) is refused on the field.
    await page.locator('[data-test=program-new]').click();
    const form = page.locator('[data-test=program-form]');
    await form.waitFor();
    await form.locator('[data-test=program-field-name]').fill('Trial beds');
    await form.locator('[data-test=program-start-0]').fill('12:00');
    await form.locator('[data-test=program-zone-add-select]').click();
    await page.locator('.q-menu .q-item', { hasText: 'Entry shrub beds' }).click();
    await form.locator('[data-test=program-zone-add]').click();
    await form.locator('[data-test=program-zone-add-select]').click();
    await page.locator('.q-menu .q-item', { hasText: 'Parking islands' }).click();
    await form.locator('[data-test=program-zone-add]').click();
    await form.locator('[data-test=program-zone-0-minutes]').fill('0');
    await form.locator('[data-test=form-save]').click();
    expect(await text(page, '[data-test=program-start-0-error]')).toMatch(/12:00 is inside the site’s no-watering hours \(10:00–18:00\)/);
    expect(await text(page, '[data-test=program-zone-0-minutes-error]')).toBe('Minutes must be above 0');
    await form.locator('[data-test=program-start-0]').scrollIntoViewIfNeeded();
    await page.waitForTimeout(300);
    await shot(page, 'program-form-errors-desktop');

    // Fixed: 05:00 runs into "Early lawns" at 04:30, and the server says so after the save.
    await form.locator('[data-test=program-start-0]').fill('05:00');
    await form.locator('[data-test=program-zone-0-minutes]').fill('15');
    await form.locator('[data-test=program-zone-1-cycle-soak] button', { hasText: 'By hand' }).click();
    await form.locator('[data-test=program-zone-1-cycle]').fill('4');
    await form.locator('[data-test=program-zone-1-soak]').fill('20');
    await form.locator('[data-test=program-start-0-error]').waitFor({ state: 'hidden' });
    await form.locator('[data-test=form-save]').click();
    await form.waitFor({ state: 'detached' });
    const trial = page.locator('[data-test=program-card][data-program="Trial beds"]');
    await trial.waitFor();
    expect(await trial.locator('[data-test=program-starts]').innerText()).toBe('05:00');
    expect(await trial.locator('[data-test=program-days]').innerText()).toBe('Mon, Wed and Fri');
    expect(await trial.locator('[data-test=program-warning][data-code=overlap]').first().innerText()).toMatch(/Overlaps “Early lawns”/);
    await page.locator('.q-notification', { hasText: 'Trial beds saved, with' }).waitFor();
    // Off and on again, from the list.
    await trial.locator('[data-test=program-enabled]').click();
    await page.locator('.q-notification', { hasText: 'Trial beds is off' }).waitFor();
    expect(await trial.locator('[data-test=program-next]').count()).toBe(0);
    await trial.locator('[data-test=program-enabled]').click();
    await trial.locator('[data-test=program-next]').waitFor();
    await page.setViewportSize(PHONE);
    await settle(page);
    await shot(page, 'programs-phone');
    await expectNoSideScroll(page);
    await trial.locator('[data-test=program-edit]').click();
    await form.waitFor();
    await page.waitForTimeout(400);
    await screenShot(page, 'program-form-phone');
    await form.locator('[data-test=form-cancel]').click();
    await form.waitFor({ state: 'detached' });
    await page.setViewportSize(DESKTOP);

    // The week ahead: the new program's slots, and the litres of the days it waters.
    await page.locator('[data-test=site-tab-schedule]').click();
    await page.locator('[data-test=week-timeline]').waitFor();
    expect(await page.locator('[data-test=timeline-day]').count()).toBe(7);
    const trialDay = page.locator('[data-test=timeline-day]').filter({ has: page.locator('[data-test=timeline-slot][data-program="Trial beds"][data-status=planned]') }).first();
    await trialDay.waitFor();
    expect(await trialDay.locator('[data-test=timeline-day-litres]').innerText()).toMatch(/^[1-9][\d,]* L$/);
    expect(await trialDay.locator('[data-test=timeline-day-runs]').innerText()).toMatch(/05:\d\d–\d\d:\d\d\s+Trial beds/);
    expect(await page.locator('[data-test=timeline-window]').count()).toBe(7); // 10:00–18:00 every day
    // Tuesday and Sunday are not watering days at Larkspur.
    expect(await page.locator('[data-test=timeline-day-restricted]').first().innerText()).toMatch(/No watering on (Sun|Tue|Thu)/);
    expect(await text(page, '[data-test=hold-title]')).toBe('No hold: programs run as planned');

    // Hold for 2 hours.
    await page.locator('[data-test=delay-hours-2]').click();
    await page.locator('[data-test=delay-reason]').fill('Storm on the way');
    await page.locator('[data-test=delay-set]').click();
    await page.locator('[data-test=hold-card][data-held=delay]').waitFor();
    expect(await text(page, '[data-test=hold-reason]')).toMatch(/^Rain delay until .+ \(Storm on the way\)$/);
    expect(await text(page, '[data-test=hold-until]')).toMatch(/^Programs run again from .+ \(site time\)$/);
    await page.locator('[data-test=timeline-hold-band]').first().waitFor();
    await page.locator('[data-test=delay-cancel]').waitFor();
    await settle(page);
    await shot(page, 'schedule-held-desktop');
    await page.setViewportSize(PHONE);
    await settle(page);
    await shot(page, 'schedule-held-phone');
    await expectNoSideScroll(page);
    await page.close();
  });

  it('lets a technician on a phone override the hold and walk two zones with Next, then Stop', async () => {
    const page = await newPage(PHONE);
    await signIn(page, 'tech@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}/walk`);
    await page.locator('[data-test=walk-setup]').waitFor();
    // The site is held (the manager's delay): the switch is there, and the start waits for it.
    expect(await text(page, '[data-test=walk-hold]')).toMatch(/Rain delay until/);
    expect(await page.locator('[data-test=walk-start]').isDisabled()).toBe(true);
    expect(await page.locator('[data-test=walk-zone]').count()).toBe(9); // all zones, chosen by default
    expect(await page.locator('[data-test=walk-zone] .q-checkbox[aria-checked=true]').count()).toBe(9);
    await page.locator('[data-test=walk-toggle-all]').click(); // none
    await page.locator('[data-test=walk-zone][data-zone="Front lawn west"] .q-checkbox').click();
    await page.locator('[data-test=walk-zone][data-zone="Front lawn east"] .q-checkbox').click();
    await page.locator('[data-test=walk-minutes-1]').click();
    await page.locator('[data-test=walk-override]').click();
    expect(await text(page, '[data-test=walk-caution]')).toMatch(/nobody is standing in the spray/);
    await settle(page);
    await shot(page, 'walk-setup-phone');
    await expectNoSideScroll(page);
    await page.setViewportSize(DESKTOP);
    await settle(page);
    await shot(page, 'walk-setup-desktop');
    await page.setViewportSize(PHONE);
    await page.locator('[data-test=walk-start]').click();

    // Zone 1 of 2, in the site's order (east before west), whatever order they were ticked in.
    const runner = page.locator('[data-test=walk-runner]');
    await runner.waitFor();
    expect(await text(page, '[data-test=walk-position]')).toBe('Zone 1 of 2');
    expect(await text(page, '[data-test=walk-zone-name]')).toBe('Front lawn east');
    await runner.locator('[data-test=zone-valve][data-state=open]').waitFor({ timeout: 5000 });
    expect(sim.board(CLUBHOUSE).relayStates().find((r) => r.relay === 1)?.open).toBe(true);
    await runner.locator('[data-test=walk-acked]').waitFor({ timeout: 5000 });
    await until(async () => /L\/min/.test(await text(page, '[data-test=walk-flow-seen]')), 8000);
    expect(await text(page, '[data-test=walk-flow-expected]')).toBe('33 L/min'); // 6 heads × 5.5 L/min
    await until(async () => /^0:0[1-9] run$|^0:[1-5]\d run$/.test(await text(page, '[data-test=walk-elapsed]')), 5000);
    await page.waitForTimeout(300);
    await screenShot(page, 'walk-running-phone');
    await expectNoSideScroll(page);

    await runner.locator('[data-test=walk-next]').click();
    await until(async () => (await text(page, '[data-test=walk-position]')) === 'Zone 2 of 2', 5000);
    expect(await text(page, '[data-test=walk-zone-name]')).toBe('Front lawn west');
    expect(await runner.locator('[data-test=walk-next]').innerText()).toMatch(/Finish/);
    await runner.locator('[data-test=walk-result][data-zone="Front lawn east"][data-outcome=ok]').waitFor({ timeout: 5000 });
    await runner.locator('[data-test=zone-valve][data-state=open]').waitFor({ timeout: 5000 });
    await until(() => sim.board(CLUBHOUSE).relayStates().find((r) => r.relay === 2)?.open, 5000);
    expect(sim.board(CLUBHOUSE).relayStates().find((r) => r.relay === 1)?.open).toBe(false);
    await runner.locator('[data-test=walk-acked]').waitFor({ timeout: 5000 });
    await until(async () => /L\/min/.test(await text(page, '[data-test=walk-flow-seen]')), 8000);
    await page.setViewportSize(DESKTOP);
    await page.waitForTimeout(400);
    await screenShot(page, 'walk-running-desktop');
    await page.setViewportSize(PHONE);

    await runner.locator('[data-test=walk-stop]').click();
    const done = page.locator('[data-test=walk-finished][data-state=stopped]');
    await done.waitFor();
    expect(await text(page, '[data-test=walk-finished-title]')).toBe('Walk stopped');
    expect(await done.locator('[data-test=walk-result]').count()).toBe(2);
    expect(await done.locator('[data-test=walk-result][data-outcome=ok]').count()).toBe(2);
    expect(await text(page, '[data-test=walk-tally]')).toMatch(/2 OK.*0 failed.*0 not reached/s);
    await until(() => sim.board(CLUBHOUSE).relayStates().every((r) => !r.open), 5000);
    await settle(page);
    await shot(page, 'walk-finished-phone');
    await expectNoSideScroll(page);
    await page.setViewportSize(DESKTOP);
    await settle(page);
    await shot(page, 'walk-finished-desktop');

    // Saved as each zone's service record by the server.
    const zones = (await (await page.request.get(`${demo.rt.url}/api/sites/${site('larkspur')}`)).json()) as { zones: { id: number; name: string }[] };
    const east = zones.zones.find((z) => z.name === 'Front lawn east')!;
    const records = (await (await page.request.get(`${demo.rt.url}/api/zones/${east.id}/service-records`)).json()) as { items: { kind: string; summary: string; author: string }[] };
    expect(records.items[0]).toMatchObject({ kind: 'walk_test', author: 'Kiri Anand' });
    expect(records.items[0].summary).toMatch(/^Walk test: opened/);

    // A technician sees the hold but cannot set one.
    await page.goto(`${demo.rt.url}/sites/${site('larkspur')}/schedule`);
    await page.locator('[data-test=hold-card][data-held=delay]').waitFor();
    expect(await page.locator('[data-test=delay-set]').count()).toBe(0);
    await page.close();
  });

  it('shows an owner the schedule read-only, and lets them hold watering at their own site', async () => {
    const page = await newPage();
    await signIn(page, 'owner@runnel.test');
    await openSite(page, siteName.heron);
    expect(await page.locator('[data-test=site-tab-walk]').count()).toBe(0);
    await page.locator('[data-test=site-tab-programs]').click();
    await page.locator('[data-test=programs-read-only]').waitFor();
    expect(await page.locator('[data-test=program-card]').count()).toBe(2);
    expect(await page.locator('[data-test=program-new], [data-test=program-edit], [data-test=program-enabled]').count()).toBe(0);
    expect(await page.locator('[data-test=program-enabled-word]').first().innerText()).toBe('ON');
    await page.setViewportSize(PHONE);
    await settle(page);
    await shot(page, 'programs-owner-phone');
    await expectNoSideScroll(page);
    await page.setViewportSize(DESKTOP);

    await page.locator('[data-test=programs-to-schedule]').click();
    await page.locator('[data-test=week-timeline]').waitFor();
    expect(await page.locator('[data-test=timeline-day]').count()).toBe(7);
    expect(await page.locator('[data-test=timeline-day-restricted]').first().innerText()).toMatch(/odd days only/);
    await settle(page);
    await shot(page, 'schedule-owner-desktop');

    await page.locator('[data-test=delay-hours-2]').click();
    await page.locator('[data-test=delay-set]').click();
    await page.locator('[data-test=hold-card][data-held=delay]').waitFor();
    expect(await text(page, '[data-test=hold-reason]')).toMatch(/^Rain delay until/);
    await page.setViewportSize(PHONE);
    await settle(page);
    await shot(page, 'schedule-owner-phone');
    await expectNoSideScroll(page);

    // The hold ends when they say so.
    await page.locator('[data-test=delay-cancel]').click();
    await page.locator('[data-test=hold-card][data-held=none]').waitFor();
    await page.close();
  });

  it('sent no request to any host but 127.0.0.1', () => {
    expect(foreign).toEqual([]);
  });
});
