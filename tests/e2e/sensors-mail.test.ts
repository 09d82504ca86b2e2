import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Page } from 'playwright-core';
import { sql } from 'drizzle-orm';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import path from 'node:path';
import { launchBrowser, screenshot, SCREENSHOT_DIR, watchForeignRequests } from '../helpers/browser';
import { DEMO_PASSWORD } from '../../server/db/seed-demo';
import { watchOf } from '../../server/alerts/watch';
import { recomputeHours } from '../../server/history/readings-rollup';

/**
 * A controller's sensor history and the demo's caught-mail page in Debian's Chromium against the
 * demo server: charts drawn from a week of readings with valve openings, range switching, a phone
 * without sideways scrolling, the link from an alert; an invitation caught and listed for an
 * admin, and neither page nor nav entry for a manager.
 */
const DESKTOP = { width: 1280, height: 800 };
const PHONE = { width: 390, height: 844 };
const CLUBHOUSE = 'FHG-LC-0101'; // flow sensor, master valve on relay 8
const BUILDING_C = 'FHG-LC-0102'; // no flow sensor
const HOUR = 3_600_000;
const INVITEE = { email: 'rowan.achterberg@fernhollow.test', name: 'Rowan Achterberg' };

let demo: TestRuntime;
let browser: { context: BrowserContext; close: () => Promise<void> };
const foreign: string[] = [];
/** Uncaught errors in the pages (a chart library refusing its options shows up here, not on screen). */
const pageErrors: string[] = [];
let clubhouseId = 0;
let buildingCId = 0;
let frontLawnEast = 0;
let courtyard = 0;
let alertId = 0;

/** Minutes ago of each opening in the last day (zone relay, minutes ago, minutes open). */
const OPENINGS: [relay: number, agoMin: number, minutes: number][] = [
  [1, 20 * 60, 12],
  [4, 20 * 60 - 15, 30],
  [1, 6 * 60, 10],
];

beforeAll(async () => {
  demo = await startDemoRuntime({ ALERTS: '0' });
  browser = await launchBrowser();
  clubhouseId = demo.seed.controllerIds[CLUBHOUSE];
  buildingCId = demo.seed.controllerIds[BUILDING_C];
  const zs = await demo.tdb.db.execute<{ id: number; relay: number }>(sql`select id, relay from zones where controller_id = ${clubhouseId}`);
  const zoneOf = (relay: number) => zs.rows.find((z) => z.relay === relay)!.id;
  frontLawnEast = zoneOf(1);
  courtyard = zoneOf(4);

  // Test data: eight days of readings every two minutes, flowing while a zone is open, and the
  // valve marks of three openings in the last day (each with the master valve).
  const now = Date.now();
  const spans = OPENINGS.map(([relay, ago, minutes]) => ({ relay, start: now - ago * 60_000, end: now - ago * 60_000 + minutes * 60_000 }));
  const flowCase = spans.map((s) => sql`when t >= ${new Date(s.start)} and t < ${new Date(s.end)} then ${s.relay === 4 ? 44 : 33}`);
  await demo.tdb.db.execute(sql`
    insert into readings (controller_id, at, board_at, received_at, seq, rain, moisture_raw, moisture_pct, supply_v, flow_lpm, rssi)
    select ${clubhouseId}, t, t, t, extract(epoch from t)::bigint, false, 2000,
      28 + 6 * sin(extract(epoch from t) / 13750.0), 24.1 + 0.2 * sin(extract(epoch from t) / 900.0),
      case ${sql.join(flowCase, sql` `)} else 0 end, -61
    from generate_series(${new Date(now - 8 * 24 * HOUR)}::timestamptz, ${new Date(now - 60_000)}::timestamptz, interval '2 minutes') t`);
  await demo.tdb.db.execute(sql`
    insert into readings (controller_id, at, board_at, received_at, seq, rain, moisture_raw, moisture_pct, supply_v, flow_lpm, rssi)
    select ${buildingCId}, t, t, t, extract(epoch from t)::bigint, false, 1900, 31 + 3 * sin(extract(epoch from t) / 20000.0), 23.8, null, -70
    from generate_series(${new Date(now - 24 * HOUR)}::timestamptz, ${new Date(now - 60_000)}::timestamptz, interval '5 minutes') t`);
  for (const s of spans) {
    const zoneId = s.relay === 1 ? frontLawnEast : courtyard;
    await demo.tdb.db.execute(sql`insert into valve_events (controller_id, zone_id, relay, open, source, at) values
      (${clubhouseId}, null, 8, true, 'command', ${new Date(s.start - 1000)}),
      (${clubhouseId}, ${zoneId}, ${s.relay}, true, 'command', ${new Date(s.start)}),
      (${clubhouseId}, ${zoneId}, ${s.relay}, false, 'command', ${new Date(s.end)}),
      (${clubhouseId}, null, 8, false, 'command', ${new Date(s.end + 1000)})`);
  }
  await recomputeHours(demo.tdb.db, clubhouseId, now - 8 * 24 * HOUR, now);
  const opened = new Date(now - 6 * HOUR);
  const a = await demo.tdb.db.execute<{ id: number }>(sql`
    insert into alerts (site_id, controller_id, zone_id, kind, severity, episode_key, title, message, details, opened_at, last_seen_at)
    values (${demo.seed.siteIds.larkspur}, ${clubhouseId}, ${frontLawnEast}, 'high_flow', 'warning', ${`high_flow:zone:${frontLawnEast}`},
      'High flow on Front lawn east', 'Flow is 33 L/min, 1.6 × the nominal 21 L/min.', '{}'::jsonb, ${opened}, ${opened})
    returning id`);
  alertId = a.rows[0].id;
}, 120_000);

afterAll(async () => {
  await browser?.close();
  await demo?.close();
});

const smtp = () => watchOf(demo.rt.services)!.fakeSmtp!;

async function newPage(viewport = DESKTOP): Promise<Page> {
  await browser.context.clearCookies();
  const page = await browser.context.newPage();
  await page.setViewportSize(viewport);
  const seen = watchForeignRequests(page);
  page.on('pageerror', (e) => pageErrors.push(e.message));
  page.on('close', () => foreign.push(...seen));
  return page;
}

async function signIn(page: Page, email: string): Promise<void> {
  await page.goto(`${demo.rt.url}/sign-in`);
  await page.locator('[data-test=sign-in-email]').fill(email);
  await page.locator('[data-test=sign-in-password]').fill(DEMO_PASSWORD);
  await page.locator('[data-test=sign-in-submit]').click();
  await page.waitForURL((u) => u.pathname === '/');
}

async function settle(page: Page): Promise<void> {
  await page.evaluate(() => window.scrollTo(0, 0));
  await page.waitForTimeout(400);
}

/** Wait until the chart shows readings for the bucket size asked for. */
async function chartFor(page: Page, bucketMs: number) {
  await page.locator(`[data-test=sensor-sampling][data-bucket-ms="${bucketMs}"]`).waitFor();
  const chart = page.locator('[data-test=sensor-chart]');
  await chart.locator('canvas').first().waitFor();
  await page.waitForTimeout(300); // one frame for ECharts to draw
  return {
    points: Number(await chart.getAttribute('data-points')),
    marks: Number(await chart.getAttribute('data-valve-marks')),
    /** Canvas pixels drawn in the moisture line's colour and in the valve bars' colour. */
    ...(await chart.locator('canvas').first().evaluate((c: HTMLCanvasElement) => {
      const d = c.getContext('2d')!.getImageData(0, 0, c.width, c.height).data;
      const near = (i: number, [r, g, b]: number[]) => Math.abs(d[i] - r) + Math.abs(d[i + 1] - g) + Math.abs(d[i + 2] - b) < 24 && d[i + 3] > 200;
      let line = 0;
      let bars = 0;
      for (let i = 0; i < d.length; i += 4) {
        if (near(i, [0x3f, 0x6f, 0x4d])) line++;
        if (near(i, [0x1b, 0x4f, 0x63])) bars++;
      }
      return { line, bars };
    })),
  };
}

const noSideScroll = (page: Page) => page.evaluate(() => document.scrollingElement!.scrollWidth <= window.innerWidth);

describe('sensor history', () => {
  it('opens from the site page and draws moisture, voltage, flow and the valve openings of the last 24 hours', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${demo.seed.siteIds.larkspur}`);
    await page.locator(`[data-test=controller-live][data-serial=${CLUBHOUSE}] [data-test=controller-history-link]`).click();
    await page.waitForURL((u) => u.pathname === `/controllers/${clubhouseId}/readings`);
    expect(await page.locator('[data-test=sensor-controller]').innerText()).toContain('Clubhouse board');

    // 24 h in 600 buckets: 144 s each, so two-minute readings share some of them.
    const day = await chartFor(page, 144_000);
    expect(day.points).toBeGreaterThanOrEqual(590);
    expect(day.points).toBeLessThanOrEqual(601);
    expect(day.line).toBeGreaterThan(500);
    expect(day.bars).toBeGreaterThan(50);
    // Three zone openings, each with the master valve.
    expect(day.marks).toBe(6);
    expect(await page.locator('[data-test=sensor-sampling]').getAttribute('data-downsampled')).toBe('true');
    expect(await page.locator('[data-test=sensor-sampling]').innerText()).toContain('Downsampled: one point per 2 min 24 s, the average of up to 2 readings');
    for (const key of ['moisture', 'supply', 'flow']) {
      expect(await page.locator(`[data-test=series-${key}]`).getAttribute('data-empty')).toBe('false');
    }
    expect(await page.locator('[data-test=series-flow]').innerText()).toMatch(/L\/min/);
    const spans = page.locator('[data-test=valve-span]');
    expect(await spans.count()).toBe(6);
    expect(await page.locator('[data-test=valve-spans]').innerText()).toContain('Courtyard rotors');
    expect(await page.locator('[data-test=valve-spans]').innerText()).toContain('Master valve');
    expect(await spans.filter({ hasText: 'Front lawn east' }).first().innerText()).toContain('10 min');
    await settle(page);
    await screenshot(page, 'sensors-day-desktop');

    // In US units the flow is in gallons a minute.
    await page.locator('[data-test=units-us]').click();
    await expect.poll(() => page.locator('[data-test=series-flow]').innerText()).toMatch(/gal\/min/);
    await page.locator('[data-test=units-metric]').click();
    await expect.poll(() => page.locator('[data-test=series-flow]').innerText()).toMatch(/L\/min/);
    await page.close();
  });

  it('switches to 7 days, 30 days and chosen dates, with coarser buckets, and refuses dates the wrong way round', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.goto(`${demo.rt.url}/controllers/${clubhouseId}/readings`);
    await chartFor(page, 144_000);

    await page.locator('[data-test=sensor-range-7d]').click();
    await page.waitForURL((u) => u.searchParams.get('range') === '7d');
    // 7 days in 600 buckets: 16.8 min each (1,008 s).
    const week = await chartFor(page, 1_008_000);
    expect(week.points).toBeGreaterThan(550);
    expect(week.marks).toBe(6);
    expect(await page.locator('[data-test=sensor-sampling]').innerText()).toContain('one point per 17 min,');
    await settle(page);
    await screenshot(page, 'sensors-week-desktop');

    // 30 days: 1.2 h rounded up to 2 h, read from the hourly rollup; only the last eight days have readings.
    await page.locator('[data-test=sensor-range-30d]').click();
    const month = await chartFor(page, 7_200_000);
    expect(month.points).toBeGreaterThan(90);
    expect(month.points).toBeLessThanOrEqual(8 * 12 + 1);
    expect(await page.locator('[data-test=sensor-sampling]').innerText()).toContain('one point per 2 h,');

    await page.locator('[data-test=sensor-range-custom]').click();
    await page.locator('[data-test=sensor-from]').fill('2030-05-10');
    await page.locator('[data-test=sensor-to]').fill('2030-05-01');
    await page.locator('[data-test=sensor-custom-apply]').click();
    await page.locator('.q-field--error', { hasText: '“To” must not be before “From”' }).waitFor();
    expect(new URL(page.url()).searchParams.get('range')).toBe('30d');
    // Two days ending today at the site (Denver): readings and the openings of the last day.
    const today = new Intl.DateTimeFormat('en-CA', { timeZone: 'America/Denver' }).format(new Date());
    const yesterday = new Intl.DateTimeFormat('en-CA', { timeZone: 'America/Denver' }).format(new Date(Date.now() - 24 * HOUR));
    await page.locator('[data-test=sensor-from]').fill(yesterday);
    await page.locator('[data-test=sensor-to]').fill(today);
    await page.locator('[data-test=sensor-custom-apply]').click();
    await page.waitForURL((u) => u.searchParams.get('range') === 'custom' && u.searchParams.get('from') === yesterday && u.searchParams.get('to') === today);
    // 48 h (give or take a changed clock) in 600 buckets: about 288 s.
    await page.locator('[data-test=sensor-sampling]:not([data-bucket-ms="7200000"])').waitFor();
    const bucket = Number(await page.locator('[data-test=sensor-sampling]').getAttribute('data-bucket-ms'));
    expect(bucket).toBeGreaterThanOrEqual(282_000);
    expect(bucket).toBeLessThanOrEqual(294_000);
    expect(Number(await page.locator('[data-test=sensor-chart]').getAttribute('data-valve-marks'))).toBe(6);
    await page.close();
  });

  it('says when a controller has no flow sensor', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.goto(`${demo.rt.url}/controllers/${buildingCId}/readings`);
    const c = await chartFor(page, 144_000);
    await settle(page);
    await screenshot(page, 'sensors-no-flow-desktop');
    expect(c.points).toBeGreaterThan(250);
    expect(c.marks).toBe(0);
    expect(c.line).toBeGreaterThan(300);
    expect(c.bars).toBe(0);
    expect(await page.locator('[data-test=series-moisture]').getAttribute('data-empty')).toBe('false');
    expect(await page.locator('[data-test=series-flow]').getAttribute('data-empty')).toBe('true');
    expect(await page.locator('[data-test=series-flow]').innerText()).toContain('No flow sensor fitted');
    // Five-minute readings in 144 s buckets: one reading a point.
    expect(await page.locator('[data-test=sensor-sampling]').getAttribute('data-downsampled')).toBe('false');
    expect(await page.locator('[data-test=valve-spans-summary]').innerText()).toContain('No valve opened');
    await page.close();
  });

  it("links from an alert to its controller's readings with the alert's zone highlighted", async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.goto(`${demo.rt.url}/alerts`);
    await page.locator(`[data-test=alert-card][data-alert-id="${alertId}"] [data-test=alert-readings]`).click();
    await page.waitForURL((u) => u.pathname === `/controllers/${clubhouseId}/readings` && u.searchParams.get('zone') === String(frontLawnEast));
    await chartFor(page, 144_000);
    expect(await page.locator('[data-test=sensor-zone]').innerText()).toContain('Front lawn east');
    const highlighted = page.locator(`[data-test=valve-span][data-zone-id="${frontLawnEast}"].hl-row`);
    expect(await highlighted.count()).toBe(2);
    expect(await page.locator('.hl-row[data-test=valve-span]').count()).toBe(2);
    await settle(page);
    await screenshot(page, 'sensors-alert-zone-desktop');
    await page.close();
  });

  it('fits a 390 × 844 phone for a technician, with nothing to scroll sideways', async () => {
    const page = await newPage(PHONE);
    await signIn(page, 'tech@runnel.test');
    await page.goto(`${demo.rt.url}/sites/${demo.seed.siteIds.larkspur}`);
    await page.locator(`[data-test=controller-live][data-serial=${CLUBHOUSE}] [data-test=controller-history-link]`).click();
    await page.waitForURL((u) => u.pathname === `/controllers/${clubhouseId}/readings`);
    const phone = await chartFor(page, 240_000); // 360 buckets on a phone: 240 s each
    expect(phone.points).toBeGreaterThan(300);
    expect(phone.line).toBeGreaterThan(300);
    expect(phone.bars).toBeGreaterThan(30);
    expect(phone.marks).toBe(6);
    expect(await noSideScroll(page)).toBe(true);
    const box = await page.locator('[data-test=sensor-range-7d]').boundingBox();
    expect(box!.height).toBeGreaterThanOrEqual(44);
    await settle(page);
    await screenshot(page, 'sensors-day-phone');
    await page.locator('[data-test=sensor-range-custom]').click();
    await page.locator('[data-test=sensor-custom]').waitFor();
    expect(await noSideScroll(page)).toBe(true);
    await page.locator('[data-test=sensor-range-1y]').click();
    await chartFor(page, 25 * HOUR); // a year in 360 buckets: 24.3 h, rounded up to 25 h
    expect(await noSideScroll(page)).toBe(true);
    await settle(page);
    await screenshot(page, 'sensors-year-phone');
    await page.close();
  });
});

describe('caught mail (demo, admins only)', () => {
  it('lists an invitation the admin sent, with its subject, text and sandboxed HTML', async () => {
    const page = await newPage();
    await signIn(page, 'admin@runnel.test');
    await page.locator('[data-test=nav-mail]').waitFor();
    const status = await page.evaluate(async (body) => {
      const res = await fetch('/api/users/invitations', { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify(body) });
      return res.status;
    }, { email: INVITEE.email, name: INVITEE.name, role: 'technician', siteIds: [demo.seed.siteIds.larkspur] });
    expect(status).toBe(201);
    const caught = await smtp().waitFor((m) => m.envelopeTo.includes(INVITEE.email), 10_000);

    await page.locator('[data-test=nav-mail]').click();
    await page.waitForURL((u) => u.pathname === '/demo/mail');
    const item = page.locator(`[data-test=caught-mail][data-mail-id="${caught.id}"]`);
    await item.waitFor();
    expect(await page.locator('[data-test=caught-mail]').first().getAttribute('data-mail-id')).toBe(String(caught.id));
    expect(await item.locator('[data-test=caught-mail-subject]').innerText()).toBe(caught.subject);
    expect(await item.innerText()).toContain(INVITEE.email);

    await item.locator('[data-test=caught-mail-subject]').click();
    const text = item.locator('[data-test=caught-mail-text]');
    await text.waitFor();
    expect(await text.innerText()).toContain('/accept-invite?token=');
    const frame = item.locator('[data-test=caught-mail-html]');
    expect(await frame.getAttribute('sandbox')).toBe('');
    expect(await frame.getAttribute('srcdoc')).toContain('/accept-invite?token=');
    const inside = await frame.contentFrame().locator('body').innerText();
    expect(inside).toContain('invited you');
    await settle(page);
    await screenshot(page, 'mail-outbox-desktop');

    // A newer mail goes to the top after a refresh.
    const reset = await page.evaluate(async () => (await fetch('/api/auth/password-reset', { method: 'POST', headers: { 'Content-Type': 'application/json' }, body: JSON.stringify({ email: 'tech@runnel.test' }) })).status);
    expect(reset).toBeLessThan(300);
    const second = await smtp().waitFor((m) => m.envelopeTo.includes('tech@runnel.test'), 10_000);
    await page.locator('[data-test=mail-refresh]').click();
    await page.locator(`[data-test=caught-mail][data-mail-id="${second.id}"]`).waitFor();
    expect(await page.locator('[data-test=caught-mail]').first().getAttribute('data-mail-id')).toBe(String(second.id));

    await page.setViewportSize(PHONE);
    await page.waitForTimeout(300);
    expect(await noSideScroll(page)).toBe(true);
    expect(await item.locator('[data-test=caught-mail-html]').contentFrame().locator('body').innerText()).toContain('invited you');
    // A full-page picture leaves the sandboxed frame blank at this size; one of the screen shows it.
    await item.locator('[data-test=caught-mail-html]').scrollIntoViewIfNeeded();
    await page.screenshot({ path: path.join(SCREENSHOT_DIR, 'mail-outbox-phone-html.png') });
    await settle(page);
    await screenshot(page, 'mail-outbox-phone');
    await page.close();
  });

  it('is neither in the navigation nor open to a manager', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.locator('[data-test=nav-fleet]').waitFor();
    expect(await page.locator('[data-test=nav-mail]').count()).toBe(0);
    await page.goto(`${demo.rt.url}/demo/mail`);
    await page.waitForURL((u) => u.pathname === '/');
    expect(await page.locator('[data-test=caught-mail]').count()).toBe(0);
    const status = await page.evaluate(async () => (await fetch('/api/mail/outbox')).status);
    expect(status).toBe(403);
    await page.close();
  });

  it('asks nothing of any host but 127.0.0.1, and no page threw an error', () => {
    expect(foreign).toEqual([]);
    expect(pageErrors).toEqual([]);
  });
});
