import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Locator, Page } from 'playwright-core';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import { launchBrowser, screenshot, watchForeignRequests } from '../helpers/browser';
import { DEMO_PASSWORD, demoSites } from '../../server/db/seed-demo';
import { METRES_PER_FOOT, MM_PER_INCH } from '../../server/domain/units';

/**
 * The client against the real server and a fresh demo database, in Debian's Chromium.
 * One browser for the file; each role signs in on a page of its own (cookies cleared between).
 * After every test, whatever it did: no request and no WebSocket of its pages left 127.0.0.1.
 */
const siteName = Object.fromEntries(demoSites.map((s) => [s.key, s.name])) as Record<string, string>;
const allSites = demoSites.map((s) => s.name).sort();
const DESKTOP = { width: 1280, height: 800 };
const PHONE = { width: 390, height: 844 };

type Browser = { context: BrowserContext; close: () => Promise<void> };
let demo: TestRuntime;
let browser: Browser;
/** Requests and WebSockets of the running test's pages that went elsewhere than 127.0.0.1. */
let foreign: string[] = [];
/** Pages and extra browsers of the running test, closed after it. */
const opened: { pages: Page[]; browsers: Browser[] } = { pages: [], browsers: [] };

beforeAll(async () => {
  demo = await startDemoRuntime();
  browser = await launchBrowser();
});

afterEach(async () => {
  for (const p of opened.pages.splice(0)) if (!p.isClosed()) await p.close();
  for (const b of opened.browsers.splice(0)) await b.close();
  const seen = foreign;
  foreign = [];
  expect(seen, 'requests or WebSockets that left 127.0.0.1').toEqual([]);
});

afterAll(async () => {
  await browser?.close();
  await demo?.close();
});

/** A page of the file's browser (cookies cleared), or of `context` (a browser of its own). */
async function newPage(context?: BrowserContext): Promise<Page> {
  if (!context) await browser.context.clearCookies();
  const page = await (context ?? browser.context).newPage();
  await page.setViewportSize(DESKTOP);
  watchForeignRequests(page, foreign);
  opened.pages.push(page);
  return page;
}

/** A browser that has never seen this test run: no cookies, no local storage. */
async function freshContext(): Promise<BrowserContext> {
  const b = await launchBrowser();
  opened.browsers.push(b);
  return b.context;
}

async function signIn(page: Page, email: string): Promise<void> {
  await page.goto(`${demo.rt.url}/sign-in`);
  await page.locator('[data-test=sign-in-email]').fill(email);
  await page.locator('[data-test=sign-in-password]').fill(DEMO_PASSWORD);
  await page.locator('[data-test=sign-in-submit]').click();
  await page.waitForURL((u) => u.pathname === '/');
  await page.locator('[data-test=site-name]').first().waitFor();
}

async function visibleSites(page: Page): Promise<string[]> {
  return (await page.locator('[data-test=site-name]').allInnerTexts()).map((t) => t.trim()).sort();
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

async function openZoneForm(page: Page, name: string): Promise<Locator> {
  await zone(page, name).locator('[data-test=edit-zone]').click();
  const form = page.locator('[data-test=zone-form]');
  await form.waitFor();
  return form;
}

/** A number field's value and the unit beside it (`input` is the field's <input>, which carries data-test). */
async function numberShown(input: Locator): Promise<{ value: string; unit: string }> {
  const field = input.locator('xpath=ancestor::*[contains(concat(" ", normalize-space(@class), " "), " q-field ")][1]');
  return { value: await input.inputValue(), unit: (await field.locator('.q-field__suffix').innerText()).trim() };
}

/** A zone's area as its edit form shows it. */
async function zoneArea(page: Page, name: string): Promise<{ value: string; unit: string }> {
  const form = await openZoneForm(page, name);
  const shown = await numberShown(form.locator('[data-test=zone-field-area]'));
  await form.locator('[data-test=form-cancel]').click();
  await form.waitFor({ state: 'detached' });
  return shown;
}

/** The pipe's inside diameter on the planning page of a site. */
async function pipeDiameter(page: Page, siteKey: string): Promise<{ value: string; unit: string }> {
  await page.goto(`${demo.rt.url}/sites/${demo.seed.siteIds[siteKey]}/planning`);
  const input = page.locator('[data-test=pipe-diameter]');
  await input.waitFor();
  return numberShown(input);
}

/** What an input shows for a value: four significant digits (src/composables/use-units.ts forInput). */
const asInput = (v: number) => String(Number(v.toPrecision(4)));

/** Let transitions and the ticking clock settle before a picture. */
const settle = (page: Page) => page.waitForTimeout(400);

describe('the Runnel client', () => {
  it('shows a clear message for a wrong password without saying which part was wrong', async () => {
    const page = await newPage();
    await page.goto(`${demo.rt.url}/sites/1`);
    await page.waitForURL(/\/sign-in\?redirect=/);
    await page.locator('[data-test=sign-in-email]').fill('manager@runnel.test');
    await page.locator('[data-test=sign-in-password]').fill('not-the-password');
    await page.locator('[data-test=sign-in-submit]').click();
    const err = page.locator('[data-test=sign-in-error]');
    await err.waitFor();
    expect(await err.innerText()).toMatch(/e-mail or password/i);
    await page.setViewportSize(PHONE);
    await settle(page);
    await screenshot(page, 'sign-in-phone');
    await page.close();
  });

  it('lets an admin see every site, with the admin-only actions', async () => {
    const page = await newPage();
    const sockets: string[] = [];
    page.on('websocket', (ws) => sockets.push(ws.url()));
    await signIn(page, 'admin@runnel.test');
    // The live socket is seen by the watch (and goes to 127.0.0.1, as everything must).
    await expect.poll(() => sockets.length).toBeGreaterThan(0);
    expect(sockets.every((u) => /^ws:\/\/127\.0\.0\.1:\d+\/ws$/.test(u)), sockets.join(' ')).toBe(true);
    expect(await visibleSites(page)).toEqual(allSites);
    await expect(page.locator('[data-test=add-site]').isVisible()).resolves.toBe(true);
    expect(await page.locator('[data-test=user-role]').innerText()).toBe('Admin');
    await settle(page);
    await screenshot(page, 'fleet-desktop');
    await page.setViewportSize(PHONE);
    await page.locator('[data-test=site-card]').first().waitFor();
    await settle(page);
    await screenshot(page, 'fleet-phone');

    await page.setViewportSize(DESKTOP);
    await openSite(page, siteName.larkspur);
    for (const sel of ['edit-site', 'delete-site', 'add-controller', 'add-zone']) {
      expect(await page.locator(`[data-test=${sel}]`).count(), sel).toBe(1);
    }
    expect(await page.locator('[data-test=mains-note]').innerText()).toMatch(/mains voltage/);
    expect(await page.locator('[data-test=backflow-note]').innerText()).toMatch(/backflow preventer/);
    await page.close();
  });

  it('lets a manager edit a zone, refuses a bad value without saving, and flags a zone over supply', async () => {
    const page = await newPage();
    const zoneWrites: string[] = [];
    page.on('request', (r) => {
      if (r.url().includes('/api/zones') && r.method() !== 'GET') zoneWrites.push(`${r.method()} ${r.url()}`);
    });
    await signIn(page, 'manager@runnel.test');
    expect(await visibleSites(page)).toEqual(allSites);
    await openSite(page, siteName.larkspur);
    await zone(page, 'Front lawn east').waitFor();
    await settle(page);
    await screenshot(page, 'site-desktop');

    // A bad value: the shared schema's message shows at once and nothing is sent.
    let form = await openZoneForm(page, 'Front lawn east');
    await form.locator('[data-test=zone-field-head-count]').fill('0');
    const headErr = form.locator('[data-test=zone-field-head-count-error]');
    await headErr.waitFor();
    expect(await headErr.innerText()).toBe('At least one head');
    await form.locator('[data-test=zone-field-flow-per-head]').fill('-1');
    expect(await form.locator('[data-test=zone-field-flow-per-head-error]').innerText()).toBe('Flow per head must be above 0');
    await page.waitForTimeout(300);
    await screenshot(page, 'zone-form-error-desktop', { fullPage: false });
    await form.locator('[data-test=form-save]').click();
    await page.waitForTimeout(300);
    expect(zoneWrites).toEqual([]);
    expect(await form.isVisible()).toBe(true);

    // A good edit is saved and shown.
    await form.locator('[data-test=zone-field-head-count]').fill('7');
    await form.locator('[data-test=zone-field-flow-per-head]').fill('5.5');
    await form.locator('[data-test=zone-field-name]').fill('Front lawn east (north)');
    await form.locator('[data-test=form-save]').click();
    await form.waitFor({ state: 'detached' });
    expect(zoneWrites).toHaveLength(1);
    expect(zoneWrites[0]).toMatch(/^PATCH /);
    const edited = zone(page, 'Front lawn east \\(north\\)');
    await edited.waitFor();
    expect(await edited.locator('[data-test=zone-heads]').innerText()).toBe('7');

    // Over the usable supply (75 L/min less 20 % = 60 L/min): saved, and flagged visibly.
    form = await openZoneForm(page, 'Front lawn east \\(north\\)');
    await form.locator('[data-test=zone-field-head-count]').fill('20');
    await form.locator('[data-test=zone-over-supply]').waitFor();
    await form.locator('[data-test=form-save]').click();
    await form.waitFor({ state: 'detached' });
    await edited.locator('[data-test=zone-warning]').waitFor();
    expect(await edited.locator('[data-test=zone-warning]').innerText()).toMatch(/usable supply/);

    await page.setViewportSize(PHONE);
    await page.locator('[data-test=zone-card]').first().waitFor();
    await settle(page);
    await screenshot(page, 'site-phone');
    await page.close();
  });

  it('switches a manager to US units: flow, pressure, depth and area; the choice is kept for that manager only', async () => {
    // Dog run is 70 m² and the planning page starts with a 25 mm pipe (server/db/seed-demo.ts, PlanningPage.vue).
    // 1 ft = 0.3048 m and 1 in = 25.4 mm, exactly (NIST SP 811, 2008, Appendix B.8).
    const metricArea = { value: '70', unit: 'm²' };
    const usArea = { value: asInput(70 / METRES_PER_FOOT ** 2), unit: 'ft²' };
    const usPipe = { value: asInput(25 / MM_PER_INCH), unit: 'in' };
    expect(usArea.value).toBe('753.5');
    expect(usPipe.value).toBe('0.9843');

    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    const supply = page.locator('[data-test=site-supply]').first();
    expect(await supply.innerText()).toMatch(/L\/min$/);
    expect(await pipeDiameter(page, 'larkspur')).toEqual({ value: '25', unit: 'mm' });
    await page.goto(`${demo.rt.url}/`);
    await supply.waitFor();
    await page.locator('[data-test=units-us]').click();
    await page.waitForFunction(() => document.querySelector('[data-test=site-supply]')?.textContent?.includes('gal/min'));
    await openSite(page, siteName.larkspur);
    expect(await page.locator('[data-test=site-usable-supply]').innerText()).toMatch(/gal\/min$/);
    expect(await page.locator('[data-test=site-pressure]').innerText()).toMatch(/psi$/);
    expect(await zone(page, 'Dog run').locator('[data-test=zone-flow]').innerText()).toMatch(/gal\/min$/);
    expect(await zoneArea(page, 'Dog run')).toEqual(usArea);
    await page.evaluate(() => window.scrollTo(0, 0));
    await settle(page);
    await screenshot(page, 'site-desktop-us');
    expect(await pipeDiameter(page, 'larkspur')).toEqual(usPipe);

    // After a reload it is still US.
    await page.reload();
    await page.locator('[data-test=pipe-diameter]').waitFor();
    expect(await numberShown(page.locator('[data-test=pipe-diameter]'))).toEqual(usPipe);
    await page.close();

    // The choice belongs to the manager, not to the browser: another user in a browser of their
    // own still sees metric …
    const adminPage = await newPage(await freshContext());
    await signIn(adminPage, 'admin@runnel.test');
    expect(await adminPage.locator('[data-test=site-supply]').first().innerText()).toMatch(/L\/min$/);
    await openSite(adminPage, siteName.larkspur);
    expect(await zoneArea(adminPage, 'Dog run')).toEqual(metricArea);
    expect(await pipeDiameter(adminPage, 'larkspur')).toEqual({ value: '25', unit: 'mm' });

    // … and the manager, signing in afresh in a new browser, gets US again.
    const again = await newPage(await freshContext());
    await signIn(again, 'manager@runnel.test');
    expect(await again.locator('[data-test=site-supply]').first().innerText()).toMatch(/gal\/min$/);
    await openSite(again, siteName.larkspur);
    expect(await zoneArea(again, 'Dog run')).toEqual(usArea);
    await again.setViewportSize(PHONE);
    await again.evaluate(() => window.scrollTo(0, 0));
    await settle(again);
    await screenshot(again, 'site-phone-us');
    expect(await pipeDiameter(again, 'larkspur')).toEqual(usPipe);

    // Back to metric, for whoever signs in as the manager next.
    await again.setViewportSize(DESKTOP);
    await again.goto(`${demo.rt.url}/`);
    await again.locator('[data-test=site-supply]').first().waitFor();
    await again.locator('[data-test=units-metric]').click();
    await again.waitForFunction(() => document.querySelector('[data-test=site-supply]')?.textContent?.includes('L/min'));
  });

  it('lets a technician see only their sites and change a head count, and nothing more', async () => {
    const page = await newPage();
    await signIn(page, 'tech@runnel.test');
    expect(await visibleSites(page)).toEqual([siteName.larkspur, siteName.quarry].sort());
    expect(await page.locator('[data-test=add-site]').count()).toBe(0);
    await openSite(page, siteName.quarry);
    for (const sel of ['edit-site', 'delete-site', 'add-controller', 'add-zone', 'delete-zone', 'edit-controller']) {
      expect(await page.locator(`[data-test=${sel}]`).count(), sel).toBe(0);
    }
    const form = await openZoneForm(page, 'Lobby lawn');
    // Only the fields a technician may change are inputs; the rest is shown as text.
    expect(await form.locator('[data-test=zone-field-area]').count()).toBe(0);
    expect(await form.locator('[data-test=zone-fixed-facts]').isVisible()).toBe(true);
    await form.locator('[data-test=zone-field-head-count]').fill('9');
    const saved = page.waitForResponse((r) => r.url().includes('/api/zones/') && r.request().method() === 'PATCH');
    await form.locator('[data-test=form-save]').click();
    const res = await saved;
    expect(res.status()).toBe(200);
    expect(res.request().postDataJSON()).toEqual({ headCount: 9 });
    await form.waitFor({ state: 'detached' });
    expect(await zone(page, 'Lobby lawn').locator('[data-test=zone-heads]').innerText()).toBe('9');
    await page.close();
  });

  it('lets an owner see only their own site, read only', async () => {
    const page = await newPage();
    await signIn(page, 'owner@runnel.test');
    expect(await visibleSites(page)).toEqual([siteName.heron]);
    await openSite(page, siteName.heron);
    await zone(page, 'Pool lawn').waitFor();
    expect(await page.locator('[data-test=edit-zone]').count()).toBe(0);
    expect(await page.locator('[data-test=edit-site]').count()).toBe(0);

    // Another site is simply not there for them.
    await page.goto(`${demo.rt.url}/sites/${demo.seed.siteIds.larkspur}`);
    await page.locator('[data-test=site-missing]').waitFor();

    await page.locator('[data-test=user-menu]').click();
    await page.locator('[data-test=sign-out]').click();
    await page.waitForURL(/\/sign-in/);
    await page.close();
  });

  it('catches a request and a WebSocket to another host, and lets the app’s own through', async () => {
    // A page of its own (no CSP, watched apart from the per-test list) tries both toward
    // "localhost", a name other than 127.0.0.1 that still goes nowhere off this machine.
    const page = await browser.context.newPage();
    opened.pages.push(page);
    const seen = watchForeignRequests(page);
    await page.goto('about:blank');
    await page.evaluate(async (own) => {
      new WebSocket('ws://localhost:9/');
      new WebSocket(own);
      await fetch('http://localhost:9/probe').catch(() => null);
    }, `${demo.rt.url.replace(/^http/, 'ws')}/ws`);
    await expect.poll(() => seen.length).toBe(2);
    expect(seen.sort()).toEqual(['http://localhost:9/probe', 'websocket ws://localhost:9/']);
  });
});
