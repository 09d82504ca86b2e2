import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Locator, Page } from 'playwright-core';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import { launchBrowser, screenshot, watchForeignRequests } from '../helpers/browser';
import { until } from '../helpers/live';
import { DEMO_PASSWORD, demoSites } from '../../server/db/seed-demo';
import { provisionBoards } from '../../server/services/device-secrets';
import { startSimulator, type Simulator } from '../../simulator/fleet';

/**
 * The live parts in Debian's Chromium: the real server, its embedded broker and simulated
 * boards speaking the protocol, a fresh demo database. A technician starts and stops zones from
 * the site page and the board's relays follow; an owner only watches; an admin makes it rain.
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
  // Short acknowledgement timeouts, so a board that stays silent is reported within seconds.
  demo = await startDemoRuntime({ ACK_TIMEOUT_MS: '800', COMMAND_RETRIES: '1' });
  const boards = await provisionBoards(demo.rt.dbh.db);
  await demo.rt.services.fleet.load();
  sim = await startSimulator({ brokerUrl: demo.rt.mqttUrl!, boards: boards as never, seed: 1, sampleIntervalMs: 500, controlPort: 0 });
  await sim.ready();
  demo.rt.services.demo.simulatorUrl = sim.controlUrl;
  browser = await launchBrowser();
});

afterAll(async () => {
  await browser?.close();
  await sim?.close();
  await demo?.close();
});

async function newPage(): Promise<Page> {
  await browser.context.clearCookies();
  const page = await browser.context.newPage();
  await page.setViewportSize(DESKTOP);
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

/** A zone's row (desktop table) or card (narrow screens). */
function zone(page: Page, name: string): Locator {
  return page.locator('[data-test=zone-row], [data-test=zone-card]').filter({
    has: page.locator('[data-test=zone-name]', { hasText: new RegExp(`^${name}$`) }),
  });
}

const valve = (page: Page, name: string, state: string) => zone(page, name).locator(`[data-test=zone-valve][data-state=${state}]`);
const relayOpen = (serial: string, relay: number) => sim.board(serial).relayStates().find((r) => r.relay === relay)?.open ?? false;

async function startZone(page: Page, name: string, minutes: 2 | 5 | 10 | 15): Promise<number> {
  await zone(page, name).locator('[data-test=zone-start]').click();
  const dialog = page.locator('[data-test=zone-start-dialog]');
  await dialog.waitFor();
  expect(await dialog.locator('[data-test=start-caution]').innerText()).toMatch(/backflow preventer/);
  const t0 = Date.now();
  await dialog.locator(`[data-test=start-minutes-${minutes}]`).click();
  return t0;
}

/** Let transitions and the clock settle, and scroll up so the fixed header sits at the top of a full-page picture. */
async function settle(page: Page): Promise<void> {
  await page.evaluate(() => window.scrollTo(0, 0));
  await page.waitForTimeout(400);
}

describe('the live site page', () => {
  it('lets a technician start a zone, see it open within 2 s, queue one more, stop them and see them closed', async () => {
    const page = await newPage();
    await signIn(page, 'tech@runnel.test');
    await openSite(page, siteName.larkspur);
    await valve(page, 'Front lawn east', 'closed').waitFor();
    expect(await page.locator('[data-test=start-caution-site]').innerText()).toMatch(/nobody is standing in the spray/);

    // One zone: open on screen within 2 s of the click, and open on the board.
    const t0 = await startZone(page, 'Front lawn east', 2);
    await valve(page, 'Front lawn east', 'open').waitFor({ timeout: 5000 });
    const elapsed = Date.now() - t0;
    expect(elapsed, `shown open after ${elapsed} ms`).toBeLessThan(2000);
    expect(relayOpen(CLUBHOUSE, 1)).toBe(true);
    await page.locator('.q-notification', { hasText: 'Front lawn east is open' }).waitFor();
    // How long it has run and how long is left, ticking.
    const detail = zone(page, 'Front lawn east').locator('[data-test=zone-valve-detail]');
    await until(async () => /ran \d+:\d\d · [01]:\d\d left/.test(await detail.innerText()), 5000);
    const before = await detail.innerText();
    // the page clock ticks every second; allow a slow machine a few seconds to show it
    await until(async () => (await detail.innerText()) !== before, 4000);
    expect(await detail.innerText()).not.toBe(before);

    // A second zone fits the supply and the board's two valves; a third waits its turn.
    await startZone(page, 'Dog run', 5);
    await valve(page, 'Dog run', 'open').waitFor({ timeout: 5000 });
    await startZone(page, 'Front lawn west', 5);
    await valve(page, 'Front lawn west', 'queued').waitFor({ timeout: 5000 });
    expect(await zone(page, 'Front lawn west').locator('[data-test=zone-valve-detail]').innerText()).toBe('1st in line');
    await page.locator('.q-notification', { hasText: 'Front lawn west is waiting in line' }).waitFor();
    expect(relayOpen(CLUBHOUSE, 2)).toBe(false);

    // The controller's live readings and sparkline are there.
    const card = page.locator(`[data-test=controller-live][data-serial=${CLUBHOUSE}]`);
    await card.locator('[data-test=controller-sparkline]').waitFor({ timeout: 10_000 });
    expect(await card.locator('[data-test=controller-flow]').innerText()).toMatch(/L\/min$/);
    expect(await card.locator('[data-test=master-valve-open]').isVisible()).toBe(true);
    await page.waitForTimeout(1500); // wait for the notices to fade a little and the sparkline to grow
    await settle(page);
    await screenshot(page, 'live-site-running-desktop');
    const table = await page.locator('[data-test=zones-table] .q-table__middle').evaluate((e) => [e.scrollWidth, e.clientWidth]);
    expect(table[0], 'the zone table fits a 1280 px screen').toBeLessThanOrEqual(table[1]);
    await page.setViewportSize(PHONE);
    await page.locator('[data-test=zone-card]').first().waitFor();
    await settle(page);
    await screenshot(page, 'live-site-running-phone');
    await page.setViewportSize(DESKTOP);
    await page.locator('[data-test=zone-row]').first().waitFor();

    // The fleet page shows the site's running zones live.
    await page.locator('[data-test=back-to-fleet]').click();
    const row = page.locator('[data-test=site-row]', { hasText: siteName.larkspur });
    await until(async () => /2 zones · 1 waiting/.test(await row.locator('[data-test=site-running]').innerText()), 5000);
    expect(await row.locator('[data-test=site-last-reading]').innerText()).toMatch(/ago|now/);
    await settle(page);
    await screenshot(page, 'live-fleet-desktop');
    const fleet = await page.locator('[data-test=fleet-table] .q-table__middle').evaluate((e) => [e.scrollWidth, e.clientWidth]);
    expect(fleet[0], 'the fleet table fits a 1280 px screen').toBeLessThanOrEqual(fleet[1]);
    await page.setViewportSize(PHONE);
    await page.locator('[data-test=site-card]').first().waitFor();
    await settle(page);
    await screenshot(page, 'live-fleet-phone');
    await page.setViewportSize(DESKTOP);
    await openSite(page, siteName.larkspur);

    // Stop the first: closed on screen and on the board; the waiting zone takes its place.
    await zone(page, 'Front lawn east').locator('[data-test=zone-stop]').click();
    await valve(page, 'Front lawn east', 'closed').waitFor({ timeout: 5000 });
    expect(relayOpen(CLUBHOUSE, 1)).toBe(false);
    await valve(page, 'Front lawn west', 'open').waitFor({ timeout: 5000 });
    expect(relayOpen(CLUBHOUSE, 2)).toBe(true);

    // Stop everything at the site, after a confirmation.
    await page.locator('[data-test=stop-site]').click();
    await page.locator('[data-test=stop-site-confirm]').click();
    await valve(page, 'Front lawn west', 'closed').waitFor({ timeout: 5000 });
    await valve(page, 'Dog run', 'closed').waitFor({ timeout: 5000 });
    await until(() => sim.board(CLUBHOUSE).relayStates().every((r) => !r.open), 5000);
    await page.close();
  });

  it('lets a manager run a zone on a desktop, and tells them when a board stays silent or goes offline', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await openSite(page, siteName.quarry);
    await startZone(page, 'Lobby lawn', 10);
    await valve(page, 'Lobby lawn', 'open').waitFor({ timeout: 5000 });
    expect(relayOpen('FHG-QR-0201', 2)).toBe(true);
    await page.waitForTimeout(1500);
    await settle(page);
    await screenshot(page, 'live-site-manager-desktop');
    const table = await page.locator('[data-test=zones-table] .q-table__middle').evaluate((e) => [e.scrollWidth, e.clientWidth]);
    expect(table[0], 'the zone table fits a 1280 px screen with the edit and delete buttons').toBeLessThanOrEqual(table[1]);

    // A board that does not acknowledge: the start is reported failed with the server's reason.
    sim.board('FHG-QR-0202').setFault({ fault: 'no_ack', on: true });
    await startZone(page, 'Picnic lawn', 2);
    await valve(page, 'Picnic lawn', 'opening').waitFor({ timeout: 2000 });
    const failed = page.locator('.q-notification', { hasText: 'Picnic lawn did not open' });
    await failed.waitFor({ timeout: 8000 });
    expect(await failed.innerText()).toMatch(/no acknowledgement/);
    await valve(page, 'Picnic lawn', 'closed').waitFor();
    sim.board('FHG-QR-0202').setFault({ fault: 'no_ack', on: false });

    // A board that drops off the network: shown offline, and its zones cannot be started.
    sim.board('FHG-QR-0202').setFault({ fault: 'offline', on: true });
    const south = page.locator('[data-test=controller-live][data-serial=FHG-QR-0202]');
    await south.locator('[data-test=controller-status]', { hasText: 'Offline' }).waitFor({ timeout: 10_000 });
    expect(await zone(page, 'Picnic lawn').locator('[data-test=zone-start]').isDisabled()).toBe(true);
    sim.board('FHG-QR-0202').setFault({ fault: 'offline', on: false });
    await south.locator('[data-test=controller-status]', { hasText: 'Online' }).waitFor({ timeout: 15_000 });

    await page.locator('[data-test=stop-site]').click();
    await page.locator('[data-test=stop-site-confirm]').click();
    await valve(page, 'Lobby lawn', 'closed').waitFor({ timeout: 5000 });
    expect(relayOpen('FHG-QR-0201', 2)).toBe(false);
    await page.close();
  });

  it('shows an owner the valves and readings of their site, with no Start or Stop', async () => {
    const page = await newPage();
    await signIn(page, 'owner@runnel.test');
    await openSite(page, siteName.heron);
    await valve(page, 'Pool lawn', 'closed').waitFor();
    await page.locator('[data-test=controller-live]').first().waitFor();
    for (const sel of ['zone-start', 'zone-stop', 'stop-site', 'start-caution-site']) {
      expect(await page.locator(`[data-test=${sel}]`).count(), sel).toBe(0);
    }
    await page.close();
  });

  it('lets an admin trip a simulated rain sensor and see it on the site page', async () => {
    const page = await newPage();
    await signIn(page, 'admin@runnel.test');
    await page.locator('[data-test=nav-simulator]').click();
    const board = page.locator('[data-test=sim-board][data-serial=FHG-LC-0102]');
    await board.waitFor();
    await board.locator('[data-test=sim-rain]').click();
    await until(() => sim.board('FHG-LC-0102').rainTripped, 5000);
    await settle(page);
    await screenshot(page, 'live-simulator-desktop');

    await page.locator('[data-test=nav-fleet]').click();
    await openSite(page, siteName.larkspur);
    const card = page.locator('[data-test=controller-live][data-serial=FHG-LC-0102]');
    await card.locator('[data-test=controller-rain][data-rain=tripped]').waitFor({ timeout: 5000 });
    await page.close();
  });

  it('never sent a request to a host other than 127.0.0.1', () => {
    expect(foreign).toEqual([]);
  });
});
