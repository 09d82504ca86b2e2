import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Locator, Page } from 'playwright-core';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import path from 'node:path';
import { launchBrowser, screenshot, SCREENSHOT_DIR, watchForeignRequests } from '../helpers/browser';
import { DEMO_PASSWORD, demoSites } from '../../server/db/seed-demo';

/**
 * The client against the real server and a fresh demo database, in Debian's Chromium.
 * One browser for the file; each role signs in on a page of its own (cookies cleared between).
 */
const siteName = Object.fromEntries(demoSites.map((s) => [s.key, s.name])) as Record<string, string>;
const allSites = demoSites.map((s) => s.name).sort();
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
    await signIn(page, 'admin@runnel.test');
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
    await page.screenshot({ path: path.join(SCREENSHOT_DIR, 'zone-form-error-desktop.png') });
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

  it('switches a manager to US units, keeps the choice, and shows every flow in gal/min', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    const supply = page.locator('[data-test=site-supply]').first();
    expect(await supply.innerText()).toMatch(/L\/min$/);
    await page.locator('[data-test=units-us]').click();
    await page.waitForFunction(() => document.querySelector('[data-test=site-supply]')?.textContent?.includes('gal/min'));
    await openSite(page, siteName.larkspur);
    expect(await page.locator('[data-test=site-usable-supply]').innerText()).toMatch(/gal\/min$/);
    expect(await page.locator('[data-test=site-pressure]').innerText()).toMatch(/psi$/);
    expect(await zone(page, 'Dog run').locator('[data-test=zone-flow]').innerText()).toMatch(/gal\/min$/);
    await settle(page);
    await screenshot(page, 'site-desktop-us');

    // The choice is kept per user: after a reload it is still US.
    await page.reload();
    await page.locator('[data-test=site-usable-supply]').waitFor();
    expect(await page.locator('[data-test=site-usable-supply]').innerText()).toMatch(/gal\/min$/);
    await page.locator('[data-test=units-metric]').click();
    await page.waitForFunction(() => document.querySelector('[data-test=site-usable-supply]')?.textContent?.includes('L/min'));
    await page.close();
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

  it('never sent a request to a host other than 127.0.0.1', () => {
    expect(foreign).toEqual([]);
  });
});
