import fs from 'node:fs';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Locator, Page } from 'playwright-core';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import { launchBrowser, SCREENSHOT_DIR, screenshot, watchForeignRequests } from '../helpers/browser';
import { makePng, sitePlanPng } from '../helpers/images';
import { until } from '../helpers/live';
import { DEMO_PASSWORD } from '../../server/db/seed-demo';
import { provisionBoards } from '../../server/services/device-secrets';
import { startSimulator, type Simulator } from '../../simulator/fleet';

/**
 * Running the firm's boards in Debian's Chromium, against the real server, its embedded broker
 * and simulated boards: an admin provisions a controller and prints its setup sheet, a manager
 * re-wires relays, uploads a site plan and places zones on it, imports zones from CSV; a
 * technician watches a zone run on the plan and writes a service note with a photo.
 */
const DESKTOP = { width: 1280, height: 800 };
const PHONE = { width: 375, height: 740 };

let demo: TestRuntime;
let sim: Simulator;
let browser: { context: BrowserContext; close: () => Promise<void> };
const foreign: string[][] = [];

beforeAll(async () => {
  demo = await startDemoRuntime();
  const boards = await provisionBoards(demo.rt.dbh.db);
  await demo.rt.services.fleet.load();
  sim = await startSimulator({ brokerUrl: demo.rt.mqttUrl!, boards: boards as never, seed: 3, sampleIntervalMs: 500, controlPort: 0 });
  await sim.ready();
  demo.rt.services.demo.simulatorUrl = sim.controlUrl;
  browser = await launchBrowser();
  // Every page, the setup sheets opened in new tabs included.
  browser.context.on('page', (p) => foreign.push(watchForeignRequests(p)));
}, 120_000);

afterAll(async () => {
  await browser?.close();
  await sim?.close();
  await demo?.close();
});

const siteId = (key: string) => demo.seed.siteIds[key];

async function newPage(viewport = DESKTOP): Promise<Page> {
  await browser.context.clearCookies();
  const page = await browser.context.newPage();
  await page.setViewportSize(viewport);
  return page;
}

async function signIn(page: Page, email: string): Promise<void> {
  await page.goto(`${demo.rt.url}/sign-in`);
  await page.locator('[data-test=sign-in-email]').fill(email);
  await page.locator('[data-test=sign-in-password]').fill(DEMO_PASSWORD);
  await page.locator('[data-test=sign-in-submit]').click();
  await page.waitForURL((u) => u.pathname === '/');
  await page.locator('[data-test=live-indicator][data-state=live]').waitFor();
}

async function openSite(page: Page, key: string): Promise<void> {
  await page.goto(`${demo.rt.url}/sites/${siteId(key)}`);
  await page.locator('[data-test=site-title]').waitFor();
  await page.locator('[data-test=live-indicator][data-state=live]').waitFor();
}

/** Choose an option of a Quasar select by its label. */
async function pick(page: Page, select: Locator, label: string): Promise<void> {
  await select.click();
  await page.locator('.q-menu [role=option]', { hasText: new RegExp(`^${label}$`) }).click();
  await page.locator('.q-menu').waitFor({ state: 'detached' });
}

function zone(page: Page, name: string): Locator {
  return page.locator('[data-test=zone-row], [data-test=zone-card]').filter({
    has: page.locator('[data-test=zone-name]', { hasText: new RegExp(`^${name}$`) }),
  });
}
const zoneId = async (page: Page, name: string) => Number(await zone(page, name).getAttribute('data-zone-id'));
const controllerRow = (page: Page, serial: string) => page.locator('[data-test=controller-row], [data-test=controller-card]').filter({ hasText: serial });

async function startZone(page: Page, name: string): Promise<void> {
  await zone(page, name).locator('[data-test=zone-start]').click();
  await page.locator('[data-test=zone-start-dialog] [data-test=start-minutes-2]').click();
  await zone(page, name).locator('[data-test=zone-valve][data-state=open]').waitFor({ timeout: 5000 });
}

async function settle(page: Page): Promise<void> {
  await page.evaluate(() => window.scrollTo(0, 0));
  await page.waitForTimeout(400);
}

/** A picture of one part of the page (the full page of a phone is very long). */
async function shoot(part: Locator, name: string): Promise<void> {
  fs.mkdirSync(SCREENSHOT_DIR, { recursive: true });
  await part.screenshot({ path: path.join(SCREENSHOT_DIR, `${name}.png`) });
}

/** What is on the screen now (a dialog), not the whole page behind it. */
async function shootView(page: Page, name: string): Promise<void> {
  fs.mkdirSync(SCREENSHOT_DIR, { recursive: true });
  await page.screenshot({ path: path.join(SCREENSHOT_DIR, `${name}.png`) });
}

/** What the API says, with the page's own session. */
const apiGet = <T>(page: Page, path: string) => page.evaluate(async (p) => (await fetch(p)).json(), path) as Promise<T>;

describe('provisioning a controller', () => {
  it('lets an admin add a controller, shows its secret once and prints the setup sheet with it', async () => {
    const page = await newPage();
    await signIn(page, 'admin@runnel.test');
    await openSite(page, 'millbrook');
    await page.setViewportSize(PHONE);
    await page.waitForTimeout(400);
    await shoot(page.locator('section[aria-labelledby=controllers-title]'), 'devices-controllers-admin-phone');
    await page.setViewportSize(DESKTOP);
    await page.locator('[data-test=controller-provision]').click();
    const form = page.locator('[data-test=provision-form]');
    await form.locator('[data-test=provision-name]').fill('Pump house board');
    await pick(page, form.locator('[data-test=provision-relays]'), '6 relays');
    await pick(page, form.locator('[data-test=provision-master]'), 'Relay 6');
    await form.locator('[data-test=provision-stagger]').fill('700');
    await form.locator('[data-test=provision-valve-cap]').fill('2');
    await form.locator('[data-test=provision-flow-sensor]').click();
    await form.locator('[data-test=form-save]').click();

    const dialog = page.locator('[data-test=secret-dialog]');
    await dialog.waitFor();
    const serial = (await dialog.locator('[data-test=provision-serial]').innerText()).trim();
    const secret = (await dialog.locator('[data-test=provision-secret]').innerText()).trim();
    expect(serial).toMatch(/^RN-[A-HJ-NP-Z2-9]{4}-[A-HJ-NP-Z2-9]{4}$/);
    expect(secret.length).toBeGreaterThanOrEqual(16);
    expect(await dialog.innerText()).toMatch(/Shown this once/);
    expect(await dialog.locator('[data-test=wiring-caution]').innerText()).toMatch(/mains voltage.*qualified electrician under local codes/s);
    await page.waitForTimeout(300);
    await shootView(page, 'devices-secret-desktop');

    // Copied exactly as shown.
    await browser.context.grantPermissions(['clipboard-read', 'clipboard-write'], { origin: demo.rt.url });
    await dialog.locator('[data-test=provision-copy]').click();
    await dialog.locator('[data-test=provision-copy]', { hasText: 'Copied' }).waitFor();
    expect(await page.evaluate(() => navigator.clipboard.readText())).toBe(secret);

    // The printable sheet, opened in a new tab by a form post carrying the secret.
    const [sheet] = await Promise.all([browser.context.waitForEvent('page'), dialog.locator('[data-test=provision-sheet]').click()]);
    await sheet.waitForLoadState();
    const html = await sheet.content();
    expect(html).toContain(serial);
    expect(html).toContain(secret);
    expect(html).toMatch(/<svg[^>]*>[\s\S]*<\/svg>/);
    expect(html).toContain('Pump house board');
    expect(html).toMatch(/Master valve/);
    await screenshot(sheet, 'devices-setup-sheet');
    await sheet.close();

    // Closed, the secret is nowhere on the page, and the server never gives it again.
    await dialog.locator('[data-test=provision-done]').click();
    await dialog.waitFor({ state: 'detached' });
    expect(await page.content()).not.toContain(secret);
    const row = controllerRow(page, serial);
    await row.waitFor();
    const id = Number(await row.getAttribute('data-controller-id'));
    expect(JSON.stringify(await apiGet(page, `/api/sites/${siteId('millbrook')}`))).not.toContain(secret);

    // The plain sheet link (staff): the same sheet without the secret.
    await row.locator('[data-test=controller-menu]').click();
    const href = await page.locator('[data-test=controller-setup-sheet]').getAttribute('href');
    expect(href).toBe(`/api/controllers/${id}/setup-sheet`);
    const plain = await page.evaluate(async (u) => (await fetch(u)).text(), href!);
    expect(plain).toContain(serial);
    expect(plain).not.toContain(secret);
    await page.keyboard.press('Escape');

    // A new secret, shown once again (on a phone this time); the old one no longer prints.
    await page.setViewportSize(PHONE);
    await row.locator('[data-test=controller-menu]').click();
    await page.locator('[data-test=controller-rotate]').click();
    await page.locator('[data-test=rotate-confirm]').click();
    await dialog.waitFor();
    const secret2 = (await dialog.locator('[data-test=provision-secret]').innerText()).trim();
    expect(secret2).not.toBe(secret);
    await page.waitForTimeout(300);
    await shootView(page, 'devices-secret-phone');
    const oldSheet = await page.evaluate(
      async ({ id, s }) => (await fetch(`/api/controllers/${id}/setup-sheet`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ secret: s }) })).status,
      { id, s: secret },
    );
    expect(oldSheet).toBe(400);
    await dialog.locator('[data-test=provision-done]').click();
    await page.setViewportSize(DESKTOP);

    // Move it to another site: it leaves this page, and the answer says what happened to programs.
    await row.locator('[data-test=controller-menu]').click();
    await page.locator('[data-test=controller-move]').click();
    const move = page.locator('[data-test=move-form]');
    await pick(page, move.locator('[data-test=move-site]'), 'Heron Lake Homeowners Association');
    await move.locator('[data-test=form-save]').click();
    await page.locator('.q-dialog', { hasText: 'It now serves Heron Lake Homeowners Association' }).waitFor();
    expect(await page.locator('.q-dialog', { hasText: 'Pump house board moved' }).innerText()).toMatch(/No zone was in another site’s programs/);
    await page.locator('[data-test=move-result-ok]').click();
    await row.waitFor({ state: 'detached' });

    // Retired at its new site: it stays listed, with its history, and has no secret to change.
    await openSite(page, 'heron');
    await row.locator('[data-test=controller-menu]').click();
    await page.locator('[data-test=controller-retire]').click();
    await page.locator('[data-test=retire-confirm]').click();
    await page.locator('.q-notification', { hasText: 'Pump house board is retired. Its history stays.' }).waitFor();
    await row.locator('[data-test=controller-status]', { hasText: 'Retired' }).waitFor();
    await row.locator('[data-test=controller-menu]').click();
    await page.locator('[data-test=controller-service]').waitFor();
    expect(await page.locator('[data-test=controller-rotate]').count()).toBe(0);
    await page.keyboard.press('Escape');
    await page.close();
  });

  it('tells an admin, in the server’s words, why a controller with an open valve cannot be retired', async () => {
    const page = await newPage();
    await signIn(page, 'admin@runnel.test');
    await openSite(page, 'larkspur');
    await startZone(page, 'C-block lawn');
    const row = controllerRow(page, 'FHG-LC-0102');
    await row.locator('[data-test=controller-menu]').click();
    await page.locator('[data-test=controller-retire]').click();
    expect(await page.locator('.q-dialog').innerText()).toMatch(/history, valve events and readings stay/);
    await page.locator('[data-test=retire-confirm]').click();
    const refusal = page.locator('.q-notification', { hasText: 'Building C board was not retired' });
    await refusal.waitFor();
    expect(await refusal.innerText()).toMatch(/Relay 1 of Building C board is open; stop the running zones before you retire it/);
    await zone(page, 'C-block lawn').locator('[data-test=zone-stop]').click();
    await zone(page, 'C-block lawn').locator('[data-test=zone-valve][data-state=closed]').waitFor({ timeout: 5000 });
    await page.close();
  });
});

describe('the relay map', () => {
  it('shows every relay of a board and saves a re-wired zone, which a reload still shows', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await openSite(page, 'quarry');
    await controllerRow(page, 'FHG-QR-0202').locator('[data-test=controller-relays]').click();
    const map = page.locator('[data-test=relay-map]');
    await map.locator('[data-test=relay-row-6]').waitFor();
    expect(await map.locator('[data-test^=relay-row-]').count()).toBe(6);
    expect(await map.locator('[data-test=relay-row-4]').innerText()).toContain('Picnic lawn');
    expect(await map.locator('[data-test=relay-row-5]').getAttribute('data-use')).toBe('free');
    await map.locator('[data-test=relay-live-1][data-state=closed]').waitFor();

    // Taking a zone off every relay is refused, with the server's reason; nothing is saved.
    await pick(page, map.locator('[data-test=relay-select-2]'), 'Free');
    await map.locator('[data-test=relay-map-save]').click();
    expect(await map.locator('[data-test=relay-map-error]').innerText()).toMatch(/Parking medians has no relay on the map/);
    await map.locator('[data-test=relay-map-reset]').click();

    // Picnic lawn moves to relay 5; relay 4 is free.
    await pick(page, map.locator('[data-test=relay-select-5]'), 'Picnic lawn');
    expect(await map.locator('[data-test=relay-row-4]').getAttribute('data-use')).toBe('free');
    await map.locator('[data-test=relay-map-save]').click();
    await page.locator('.q-notification', { hasText: 'Relay map of South lot board saved' }).waitFor();
    await shootView(page, 'devices-relay-map-desktop');
    await map.locator('[data-test=relay-map-close]').click();
    await map.waitFor({ state: 'detached' });

    await page.reload();
    await page.locator('[data-test=site-title]').waitFor();
    expect(await zone(page, 'Picnic lawn').innerText()).toMatch(/Relay 5 · South lot board/);
    await controllerRow(page, 'FHG-QR-0202').locator('[data-test=controller-relays]').click();
    await map.locator('[data-test=relay-row-5]').waitFor();
    expect(await map.locator('[data-test=relay-row-5]').innerText()).toContain('Picnic lawn');
    expect(await map.locator('[data-test=relay-row-4]').getAttribute('data-use')).toBe('free');

    // Meanwhile a zone is wired to the other board: saving the stale map shows the server's word beside its relay.
    const dock = await zoneId(page, 'Loading dock beds');
    const north = Number(await controllerRow(page, 'FHG-QR-0201').getAttribute('data-controller-id'));
    const moved = await page.evaluate(
      async ({ dock, north }) =>
        (await fetch(`/api/zones/${dock}`, { method: 'PATCH', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ controllerId: north, relay: 7 }) })).status,
      { dock, north },
    );
    expect(moved).toBe(200);
    await pick(page, map.locator('[data-test=relay-select-6]'), 'Loading dock beds');
    await map.locator('[data-test=relay-map-save]').click();
    expect(await map.locator('[data-test=relay-error-6]').innerText()).toMatch(new RegExp(`Zone ${dock} is not on this controller`));
    expect(await map.locator('[data-test=relay-row-6]').evaluate((e) => e.classList.contains('has-error'))).toBe(true);
    await map.locator('[data-test=relay-map-close]').click();
    await map.waitFor({ state: 'detached' });

    // The same on a phone, from the controller's card.
    await page.setViewportSize(PHONE);
    await controllerRow(page, 'FHG-QR-0202').locator('[data-test=controller-relays]').click();
    await map.locator('[data-test=relay-row-6]').waitFor();
    await page.waitForTimeout(300);
    await shootView(page, 'devices-relay-map-phone');
    await page.close();
  });

  it('shows a technician the relay map without anything to change', async () => {
    const page = await newPage();
    await signIn(page, 'tech@runnel.test');
    await openSite(page, 'quarry');
    await controllerRow(page, 'FHG-QR-0201').locator('[data-test=controller-relays]').click();
    const map = page.locator('[data-test=relay-map]');
    await map.locator('[data-test=relay-row-8]').waitFor();
    expect(await map.locator('[data-test^=relay-select-]').count()).toBe(0);
    expect(await map.locator('[data-test=relay-map-save]').count()).toBe(0);
    expect(await map.locator('[data-test=relay-use-2]').innerText()).toContain('Lobby lawn');
    // Relay 7 took the zone moved over in the test before; relay 8 is still free.
    expect(await map.locator('[data-test=relay-use-7]').innerText()).toContain('Loading dock beds');
    expect(await map.locator('[data-test=relay-row-8]').getAttribute('data-use')).toBe('free');
    await page.close();
  });
});

describe('the site plan', () => {
  it('lets a manager upload a plan with progress, refuses a text file, and keeps a dragged marker after a reload', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await openSite(page, 'larkspur');
    await page.locator('[data-test=plan-empty]').waitFor();

    await page.locator('[data-test=plan-file]').setInputFiles({ name: 'larkspur-plan.png', mimeType: 'image/png', buffer: sitePlanPng() });
    const progress = page.locator('[data-test=plan-progress]');
    await progress.and(page.locator('[data-state=done]')).waitFor();
    expect(await progress.getAttribute('data-value')).toBe('1.00');
    await shoot(page.locator('[data-test=site-plan]'), 'devices-plan-uploaded-desktop');
    const img = page.locator('[data-test=plan-image]');
    await until(() => img.evaluate((e: HTMLImageElement) => e.complete && e.naturalWidth === 960), 5000);

    // A text file with an image's name: refused by content, with the server's words; the plan stays.
    await page.locator('[data-test=plan-file]').setInputFiles({ name: 'photo.png', mimeType: 'image/png', buffer: Buffer.from('Call the client about the east gate.\n') });
    await progress.and(page.locator('[data-state=failed]')).waitFor();
    const refusal = await page.locator('[data-test=plan-error]').innerText();
    expect(refusal).toMatch(/is not a PNG, JPEG or WebP image/);
    expect(refusal).toMatch(/reads the file’s content, not its name/);
    expect(await img.evaluate((e: HTMLImageElement) => e.naturalWidth)).toBe(960);

    // Place two zones and drag one to a spot on the plan.
    const east = await zoneId(page, 'Front lawn east');
    const cblock = await zoneId(page, 'C-block lawn');
    await page.locator('[data-test=plan-edit]').click();
    await page.locator(`[data-test=plan-place-${east}]`).click();
    await page.locator(`[data-test=plan-place-${cblock}]`).click();
    const surface = page.locator('[data-test=plan-surface]');
    await surface.scrollIntoViewIfNeeded();
    await dragMarker(page, east, 0.7, 0.2);
    await dragMarker(page, cblock, 0.5, 0.9);
    expect(Number(await page.locator(`[data-test=plan-marker-${cblock}]`).getAttribute('data-y'))).toBeCloseTo(0.9, 1);
    const marker = page.locator(`[data-test=plan-marker-${east}]`);
    expect(Number(await marker.getAttribute('data-x'))).toBeCloseTo(0.7, 1);
    expect(Number(await marker.getAttribute('data-y'))).toBeCloseTo(0.2, 1);
    await shoot(page.locator('[data-test=site-plan]'), 'devices-plan-editing-desktop');

    // On a phone, with a finger: touch events become pointer events on the marker.
    await page.setViewportSize(PHONE);
    await page.waitForTimeout(400);
    await surface.scrollIntoViewIfNeeded();
    await touchDrag(page, cblock, 0.25, 0.66);
    const cMarker = page.locator(`[data-test=plan-marker-${cblock}]`);
    expect(Number(await cMarker.getAttribute('data-x'))).toBeCloseTo(0.25, 1);
    expect(Number(await cMarker.getAttribute('data-y'))).toBeCloseTo(0.66, 1);
    await shoot(page.locator('[data-test=site-plan]'), 'devices-plan-editing-phone');
    await page.setViewportSize(DESKTOP);
    await page.locator('[data-test=plan-save]').click();
    await page.locator('.q-notification', { hasText: 'Zone positions saved' }).waitFor();

    await page.reload();
    await marker.waitFor();
    expect(Number(await marker.getAttribute('data-x'))).toBeCloseTo(0.7, 1);
    expect(Number(await marker.getAttribute('data-y'))).toBeCloseTo(0.2, 1);
    const saved = await apiGet<{ markers: { zoneId: number; x: number; y: number }[] }>(page, `/api/sites/${siteId('larkspur')}/plan/markers`);
    expect(saved.markers.find((m) => m.zoneId === east)?.x).toBeCloseTo(0.7, 1);
    expect(saved.markers.find((m) => m.zoneId === cblock)?.y).toBeCloseTo(0.66, 1);
    await page.close();
  });

  it('turns a zone started from the site page to the running look, and a silent board’s zones to offline', async () => {
    const page = await newPage();
    await signIn(page, 'tech@runnel.test');
    await openSite(page, 'larkspur');
    const east = await zoneId(page, 'Front lawn east');
    const cblock = await zoneId(page, 'C-block lawn');
    const marker = page.locator(`[data-test=plan-marker-${east}]`);
    await marker.and(page.locator('[data-state=closed]')).waitFor();
    expect(await page.locator('[data-test=plan-legend]').innerText()).toMatch(/Running[\s\S]*Closed[\s\S]*Controller offline/);

    await startZone(page, 'Front lawn east');
    await marker.and(page.locator('[data-state=running]')).waitFor({ timeout: 5000 });
    expect(await marker.getAttribute('aria-label')).toBe('Front lawn east: Running');

    sim.board('FHG-LC-0102').setFault({ fault: 'offline', on: true });
    await page.locator(`[data-test=plan-marker-${cblock}][data-state=offline]`).waitFor({ timeout: 15_000 });
    await page.locator('[data-test=site-plan]').scrollIntoViewIfNeeded();
    await page.waitForTimeout(300);
    await screenshot(page, 'devices-plan-live-desktop');
    await shoot(page.locator('[data-test=site-plan]'), 'devices-plan-live-section-desktop');
    await shoot(page.locator('section[aria-labelledby=controllers-title]'), 'devices-controllers-desktop');
    const table = await page.locator('[data-test=controllers-table] .q-table__middle').evaluate((e) => [e.scrollWidth, e.clientWidth]);
    expect(table[0], 'the controllers table fits a 1280 px screen').toBeLessThanOrEqual(table[1]);
    await page.setViewportSize(PHONE);
    await page.waitForTimeout(400);
    await screenshot(page, 'devices-plan-live-phone');
    await shoot(page.locator('[data-test=site-plan]'), 'devices-plan-live-section-phone');
    await page.setViewportSize(DESKTOP);
    sim.board('FHG-LC-0102').setFault({ fault: 'offline', on: false });
    await page.locator(`[data-test=plan-marker-${cblock}][data-state=closed]`).waitFor({ timeout: 15_000 });

    await zone(page, 'Front lawn east').locator('[data-test=zone-stop]').click();
    await marker.and(page.locator('[data-state=closed]')).waitFor({ timeout: 5000 });
    await page.close();
  });
});

/** Drag a plan marker (its point is 20 px below the top of its button) to a fraction of the plan. */
async function dragMarker(page: Page, id: number, x: number, y: number): Promise<void> {
  const box = (await page.locator('[data-test=plan-surface]').boundingBox())!;
  const m = (await page.locator(`[data-test=plan-marker-${id}]`).boundingBox())!;
  await page.mouse.move(m.x + m.width / 2, m.y + 20);
  await page.mouse.down();
  await page.mouse.move(box.x + box.width * x, box.y + box.height * y, { steps: 10 });
  await page.mouse.up();
}

/** The same with a finger, through Chromium's touch input (a phone has no mouse). */
async function touchDrag(page: Page, id: number, x: number, y: number): Promise<void> {
  const cdp = await page.context().newCDPSession(page);
  await cdp.send('Emulation.setTouchEmulationEnabled', { enabled: true, maxTouchPoints: 1 });
  const box = (await page.locator('[data-test=plan-surface]').boundingBox())!;
  const m = (await page.locator(`[data-test=plan-marker-${id}]`).boundingBox())!;
  const from = { x: m.x + m.width / 2, y: m.y + 20 };
  const to = { x: box.x + box.width * x, y: box.y + box.height * y };
  await cdp.send('Input.dispatchTouchEvent', { type: 'touchStart', touchPoints: [from] });
  for (let i = 1; i <= 10; i++) {
    const p = { x: from.x + ((to.x - from.x) * i) / 10, y: from.y + ((to.y - from.y) * i) / 10 };
    await cdp.send('Input.dispatchTouchEvent', { type: 'touchMove', touchPoints: [p] });
  }
  await cdp.send('Input.dispatchTouchEvent', { type: 'touchEnd', touchPoints: [] });
  await cdp.send('Emulation.setTouchEmulationEnabled', { enabled: false });
  await cdp.detach();
}

const CSV_HEADER = 'controller_serial,relay,name,plant_type,soil_texture,head_type,other_head_type,head_count,flow_per_head_lpm,area_m2,root_depth_m,efficiency,moisture_threshold_pct,notes';

describe('zones from a CSV file', () => {
  it('shows the bad row’s error and saves nothing, then adds every row of the corrected file', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await openSite(page, 'larkspur');
    const before = (await apiGet<{ zones: unknown[] }>(page, `/api/sites/${siteId('larkspur')}`)).zones.length;
    await page.setViewportSize(PHONE);
    await page.locator('[data-test=zones-csv]').scrollIntoViewIfNeeded();
    await page.waitForTimeout(300);
    await shootView(page, 'devices-zones-header-phone');
    await page.setViewportSize(DESKTOP);
    await page.locator('[data-test=zones-csv]').click();
    const dialog = page.locator('[data-test=csv-dialog]');
    await dialog.waitFor();
    expect(await dialog.locator('[data-test=csv-template]').getAttribute('href')).toBe('/api/zones/template.csv');
    const exportHref = await dialog.locator('[data-test=csv-export]').getAttribute('href');
    expect(exportHref).toBe(`/api/sites/${siteId('larkspur')}/zones.csv`);
    const exported = await page.evaluate(async (u) => (await fetch(u)).text(), exportHref!);
    expect(exported.split('\n')[0].trim()).toBe(CSV_HEADER);
    expect(exported).toContain('Front lawn east');

    const file = (heads: string) => ({
      name: 'new-zones.csv',
      mimeType: 'text/csv',
      buffer: Buffer.from(
        [
          CSV_HEADER,
          'FHG-LC-0102,4,Bike shed strip,groundcover,loam,spray,,4,4.5,40,0.2,,,',
          `FHG-LC-0101,7,Tennis court edge,cool_season_turf,clay_loam,spray,,${heads},5.5,60,0.15,0.7,,`,
          '',
        ].join('\n'),
      ),
    });
    await dialog.locator('[data-test=csv-import]').setInputFiles(file('lots'));
    const error = dialog.locator('[data-test=csv-preview-error][data-line="3"]');
    await error.waitFor();
    expect(await error.innerText()).toMatch(/head_count\s+“lots” is not a number/);
    await dialog.locator('[data-test=csv-preview-row][data-line="2"]').waitFor();
    expect(await dialog.locator('[data-test=csv-preview-error]').count()).toBe(1);
    expect(await dialog.locator('[data-test=csv-summary]').innerText()).toMatch(/2 rows: 1 ready, 1 problem/);
    expect(await dialog.locator('[data-test=csv-save]').isDisabled()).toBe(true);
    await shootView(page, 'devices-csv-preview-desktop');
    expect((await apiGet<{ zones: unknown[] }>(page, `/api/sites/${siteId('larkspur')}`)).zones.length).toBe(before);

    await dialog.locator('[data-test=csv-import]').setInputFiles(file('5'));
    await dialog.locator('[data-test=csv-preview-row][data-line="3"]').waitFor();
    expect(await dialog.locator('[data-test=csv-preview-error]').count()).toBe(0);
    await dialog.locator('[data-test=csv-save]').click();
    await dialog.waitFor({ state: 'detached' });
    await zone(page, 'Tennis court edge').waitFor();
    await zone(page, 'Bike shed strip').waitFor();
    expect((await apiGet<{ zones: unknown[] }>(page, `/api/sites/${siteId('larkspur')}`)).zones.length).toBe(before + 2);
    await page.close();
  });
});

describe('service records', () => {
  it('lets a technician add a note with a photo to a zone, listed with its thumbnail, and a note to a board', async () => {
    const page = await newPage();
    await signIn(page, 'tech@runnel.test');
    await openSite(page, 'larkspur');
    await zone(page, 'Dog run').locator('[data-test=zone-service]').click();
    const dialog = page.locator('[data-test=service-dialog]');
    await dialog.waitFor();
    await dialog.locator('[data-test=service-empty]').waitFor();
    await dialog.locator('[data-test=service-record-add]').click();
    await dialog.locator('[data-test=service-summary]').fill('Replaced a cracked spray head by the gate');
    await dialog.locator('[data-test=service-details]').fill('Head 3 of 4. Used a 4-inch pop-up, 12 ft nozzle.');
    const photo = makePng(320, 240, (x, y) => [90 + (x % 60), 140 + (y % 50), 80]);
    await dialog.locator('[data-test=service-photos]').setInputFiles({ name: 'head-3.png', mimeType: 'image/png', buffer: photo });
    await dialog.locator('[data-test=service-record-save]').click();

    const record = dialog.locator('[data-test=service-record]').first();
    await record.waitFor();
    expect(await record.locator('[data-test=service-record-summary]').innerText()).toBe('Replaced a cracked spray head by the gate');
    expect(await record.locator('[data-test=service-record-meta]').innerText()).toMatch(/^Kiri Anand · /);
    expect(await record.locator('[data-test=service-record-details]').innerText()).toMatch(/12 ft nozzle/);
    const thumb = record.locator('[data-test=service-photo] img');
    expect(await thumb.count()).toBe(1);
    await until(() => thumb.evaluate((e: HTMLImageElement) => e.complete && e.naturalWidth === 320), 5000);
    await shootView(page, 'devices-service-desktop');

    // A summary is needed; the form says so without sending.
    await dialog.locator('[data-test=service-record-add]').click();
    await dialog.locator('[data-test=service-record-save]').click();
    await dialog.locator('[data-test=service-record-form] .q-field--error', { hasText: 'Say what was found or done' }).waitFor();
    expect(await dialog.locator('[data-test=service-record]').count()).toBe(1);

    // A photo that is not one is refused by name, and nothing is stored.
    await dialog.locator('[data-test=service-summary]').fill('Valve box lid cracked');
    await dialog.locator('[data-test=service-photos]').setInputFiles({ name: 'lid.jpg', mimeType: 'image/jpeg', buffer: Buffer.from('not a photo at all') });
    await dialog.locator('[data-test=service-record-save]').click();
    expect(await dialog.locator('[data-test=service-error]').innerText()).toMatch(/Photo 1 \(lid\.jpg\)/);
    expect(await dialog.locator('[data-test=service-record]').count()).toBe(1);
    await dialog.locator('[data-test=service-cancel]').click();
    await dialog.locator('[data-test=service-close]').click();
    await dialog.waitFor({ state: 'detached' });

    // The board's own log, a note without photos.
    await controllerRow(page, 'FHG-LC-0101').locator('[data-test=controller-menu]').click();
    await page.locator('[data-test=controller-service]').click();
    await dialog.locator('[data-test=service-empty]').waitFor();
    await dialog.locator('[data-test=service-record-add]').click();
    await dialog.locator('[data-test=service-summary]').fill('Tightened the common wire at the terminal block');
    await dialog.locator('[data-test=service-record-save]').click();
    await dialog.locator('[data-test=service-record-summary]', { hasText: 'Tightened the common wire' }).waitFor();
    expect(await dialog.locator('[data-test=service-photo]').count()).toBe(0);
    await dialog.locator('[data-test=service-close]').click();
    await dialog.waitFor({ state: 'detached' });

    // On a phone the dialog fills the screen.
    await page.setViewportSize(PHONE);
    await zone(page, 'Dog run').locator('[data-test=zone-service]').click();
    await dialog.locator('[data-test=service-record]').first().waitFor();
    await page.waitForTimeout(300);
    await shootView(page, 'devices-service-phone');
    await page.close();
  });

  it('shows an owner the notes of their site with no way to add one', async () => {
    const page = await newPage();
    await signIn(page, 'owner@runnel.test');
    await openSite(page, 'heron');
    await zone(page, 'Pool lawn').locator('[data-test=zone-service]').click();
    const dialog = page.locator('[data-test=service-dialog]');
    await dialog.locator('[data-test=service-empty], [data-test=service-records]').first().waitFor();
    expect(await dialog.locator('[data-test=service-record-add]').count()).toBe(0);
    await dialog.locator('[data-test=service-close]').click();
    for (const sel of ['controller-provision', 'zones-csv', 'plan-upload', 'plan-edit', 'controller-rotate']) {
      expect(await page.locator(`[data-test=${sel}]`).count(), sel).toBe(0);
    }
    await page.close();
  });
});

describe('the whole file', () => {
  it('never sent a request to a host other than 127.0.0.1', () => {
    expect(foreign.flat()).toEqual([]);
  });
});
