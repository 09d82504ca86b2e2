import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Page } from 'playwright-core';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import { launchBrowser, screenshot, watchForeignRequests } from '../helpers/browser';
import { DEMO_PASSWORD } from '../../server/db/seed-demo';

/** Run history, alerts and the dry-spell review in Debian's Chromium against the demo server. */
let demo: TestRuntime;
let browser: { context: BrowserContext; close: () => Promise<void> };
let page: Page;
let foreign: string[] = [];

beforeAll(async () => {
  demo = await startDemoRuntime();
  browser = await launchBrowser();
  page = await browser.context.newPage();
  await page.setViewportSize({ width: 1280, height: 800 });
  foreign = watchForeignRequests(page);
  await page.goto(`${demo.rt.url}/sign-in`);
  await page.locator('[data-test=sign-in-email]').fill('manager@runnel.test');
  await page.locator('[data-test=sign-in-password]').fill(DEMO_PASSWORD);
  await page.locator('[data-test=sign-in-submit]').click();
  await page.waitForURL((u) => u.pathname === '/');
  await page.locator('[data-test=site-name]').first().waitFor();
}, 120_000);

afterAll(async () => {
  await browser?.close();
  await demo?.close();
});

describe('history, alerts and the review', () => {
  it('shows the run history with a CSV link carrying the same filters', async () => {
    await page.locator('[data-test=nav-history]').click();
    await page.waitForURL((u) => u.pathname === '/history');
    await page.locator('[data-test=history-table]').waitFor();
    await page.locator('[data-test=history-count]').waitFor();
    const href = await page.locator('[data-test=history-csv]').getAttribute('href');
    expect(href).toContain('/api/history/zone-runs.csv?');
    expect(href).toContain('sort=plannedStart');
    const csv = await page.evaluate(async (u) => (await fetch(u!)).text(), href);
    expect(csv.split('\n')[0]).toContain('zone_run_id,run_id,site,zone');
    await screenshot(page, 'history');
  });

  it('lists alerts and shows the header badge', async () => {
    await page.locator('[data-test=nav-alerts]').click();
    await page.waitForURL((u) => u.pathname === '/alerts');
    await page.locator('[data-test=alerts-summary]').waitFor();
    await page.locator('[data-test=alerts-list], [data-test=alerts-empty]').first().waitFor();
    await expect(page.locator('[data-test=alerts-badge]').count()).resolves.toBe(1);
    await screenshot(page, 'alerts');
  });

  it("opens a site's dry-spell review with its summary and a print button", async () => {
    await page.locator('[data-test=nav-fleet]').click();
    await page.locator('[data-test=site-name]').first().click();
    await page.locator('[data-test=site-tab-review]').click();
    await page.waitForURL((u) => /\/sites\/\d+\/review$/.test(u.pathname));
    await page.locator('[data-test=review-summary]').waitFor();
    await page.locator('[data-test=review-print]').waitFor();
    expect(await page.locator('[data-test=review-zone]').count()).toBeGreaterThan(0);
    await screenshot(page, 'review');
  });

  it('asks nothing of any host but 127.0.0.1', () => {
    expect(foreign).toEqual([]);
  });
});
