import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Page } from 'playwright-core';
import { startDemoRuntime, type TestRuntime } from '../helpers/runtime';
import { launchBrowser, screenshot, watchForeignRequests } from '../helpers/browser';
import { DEMO_PASSWORD } from '../../server/db/seed-demo';
import { watchOf } from '../../server/alerts/watch';
import type { CaughtMail } from '../../server/mail/fake-smtp';

/**
 * Running the firm in Debian's Chromium against the demo server: an admin invites a person, the
 * invitation reaches the local fake SMTP server, the person sets a password from the link and
 * signs in; a forgotten password is reset the same way; API tokens, webhooks, the audit log and
 * the API reference; what a technician may not open.
 */
const DESKTOP = { width: 1280, height: 800 };
const PHONE = { width: 375, height: 740 };
const INVITEE = { email: 'ines.moreau@fernhollow.test', name: 'Inês Moreau' };
const FIRST_PASSWORD = 'gravel path at dusk';
const SECOND_PASSWORD = 'heron pond in the rain';

let demo: TestRuntime;
let browser: { context: BrowserContext; close: () => Promise<void> };
const foreign: string[] = [];

beforeAll(async () => {
  demo = await startDemoRuntime();
  browser = await launchBrowser();
}, 120_000);

afterAll(async () => {
  await browser?.close();
  await demo?.close();
});

const smtp = () => watchOf(demo.rt.services)!.fakeSmtp!;

/** A page with no one signed in (the context's cookies are shared by its pages). */
async function newPage(viewport = DESKTOP): Promise<Page> {
  await browser.context.clearCookies();
  const page = await browser.context.newPage();
  await page.setViewportSize(viewport);
  const seen = watchForeignRequests(page);
  page.on('close', () => foreign.push(...seen));
  return page;
}

async function signIn(page: Page, email: string, password = DEMO_PASSWORD): Promise<void> {
  await page.goto(`${demo.rt.url}/sign-in`);
  await page.locator('[data-test=sign-in-email]').fill(email);
  await page.locator('[data-test=sign-in-password]').fill(password);
  await page.locator('[data-test=sign-in-submit]').click();
  await page.waitForURL((u) => u.pathname === '/');
}

/** The link of a given page in a caught mail, pointing at this server. */
function linkIn(m: CaughtMail, path: 'accept-invite' | 'reset-password'): string {
  const match = new RegExp(`(http://127\\.0\\.0\\.1:\\d+/${path}\\?token=[A-Za-z0-9_-]+)`).exec(m.text);
  if (!match) throw new Error(`no ${path} link in: ${m.text}`);
  expect(match[1].startsWith(demo.rt.url)).toBe(true);
  return match[1];
}

async function setPassword(page: Page, password: string): Promise<void> {
  await page.locator('[data-test=new-password]').fill(password);
  await page.locator('[data-test=new-password-again]').fill(password);
  await page.locator('[data-test=password-submit]').click();
}

/** The Quasar field around an input (its messages live there, not on the input). */
const fieldOf = (page: Page, test: string) => page.locator('.q-field', { has: page.locator(`[data-test=${test}]`) });
const rowOf = (page: Page, email: string) => page.locator(`[data-test=people-row][data-email="${email}"]`);
const bearer = (token: string) => fetch(`${demo.rt.url}/api/sites`, { headers: { authorization: `Bearer ${token}` } });

let inviteLink = '';

describe('people and their one-time links', () => {
  it('lets an admin invite a technician for one site, and mails the link', async () => {
    const page = await newPage();
    await signIn(page, 'admin@runnel.test');
    await page.locator('[data-test=nav-people]').click();
    await page.waitForURL((u) => u.pathname === '/people');
    await page.locator('[data-test=people-row]').first().waitFor();
    expect(await page.locator('[data-test=people-row]').count()).toBe(4);
    await expect(rowOf(page, 'tech@runnel.test').locator('[data-test=person-status]').getAttribute('data-status')).resolves.toBe('active');
    await screenshot(page, 'people-desktop');

    await page.locator('[data-test=people-invite]').click();
    await page.locator('[data-test=invite-dialog]').waitFor();
    // Technicians need sites; the server says so when none is chosen.
    await page.locator('[data-test=invite-email]').fill(INVITEE.email);
    await page.locator('[data-test=invite-name]').fill(INVITEE.name);
    await page.locator('[data-test=invite-role-technician]').click();
    await page.locator('[data-test=invite-sites]').click();
    await page.locator('.q-menu .q-item').filter({ hasText: 'Larkspur' }).first().click();
    await page.locator('[data-test=invite-dialog] .form-title').click(); // closes the site menu
    await screenshot(page, 'people-invite-desktop');
    await page.locator('[data-test=form-save]').click();
    await page.locator('[data-test=invite-dialog]').waitFor({ state: 'detached' });

    const row = rowOf(page, INVITEE.email);
    await row.waitFor();
    await expect(row.locator('[data-test=person-status]').getAttribute('data-status')).resolves.toBe('invited');
    expect(await row.locator('[data-test=person-sites-label]').innerText()).toMatch(/Larkspur/);

    const mail = await smtp().waitFor((m) => m.envelopeTo.includes(INVITEE.email), 10_000);
    inviteLink = linkIn(mail, 'accept-invite');

    // The same address twice: the server's message is shown on the field.
    await page.locator('[data-test=people-invite]').click();
    await page.locator('[data-test=invite-email]').fill(INVITEE.email);
    await page.locator('[data-test=invite-name]').fill('Someone else');
    await page.locator('[data-test=invite-role-manager]').click();
    await page.locator('[data-test=form-save]').click();
    await fieldOf(page, 'invite-email').getByText('Already in use').waitFor();
    await page.locator('[data-test=form-cancel]').click();
    await page.close();
  });

  it('refuses a weak password with the rule, then sets the password and signs the person in', async () => {
    const page = await newPage(PHONE);
    await page.goto(inviteLink);
    await page.locator('[data-test=password-rules]').waitFor();
    const rules = await page.locator('[data-test=password-rules]').innerText();
    expect(rules).toMatch(/10 characters/);
    expect(rules).toMatch(/commonly used/);
    expect(rules).toMatch(/e-mail name/);

    await setPassword(page, 'short');
    await fieldOf(page, 'new-password').getByText('Use at least 10 characters').waitFor();

    // Long enough for the page, refused by the server: on the list of common passwords …
    await setPassword(page, 'Password123');
    await fieldOf(page, 'new-password').getByText(/commonly used/).waitFor();
    // … and built on the e-mail name.
    await setPassword(page, 'my ines.moreau key');
    await fieldOf(page, 'new-password').getByText(/must not contain your e-mail name/).waitFor();
    await screenshot(page, 'accept-invite-phone');

    await setPassword(page, FIRST_PASSWORD);
    await page.waitForURL((u) => u.pathname === '/');
    const me = await page.evaluate(async () => (await fetch('/api/auth/me')).json());
    expect(me).toMatchObject({ email: INVITEE.email, role: 'technician' });

    // A technician: no admin entries in the menu, and /people sends them back.
    await page.locator('[data-test=nav-fleet]').waitFor({ state: 'attached' });
    for (const key of ['people', 'tokens', 'webhooks', 'api']) expect(await page.locator(`[data-test=nav-${key}]`).count()).toBe(0);
    expect(await page.locator('[data-test=nav-audit]').count()).toBe(1);
    await page.goto(`${demo.rt.url}/people`);
    await page.waitForURL((u) => u.pathname === '/');
    expect(await page.locator('[data-test=people-table]').count()).toBe(0);

    // The link worked once.
    await page.goto(inviteLink);
    await setPassword(page, 'another long phrase');
    await page.locator('[data-test=link-refused]').waitFor();
    await expect(page.locator('[data-test=link-refused]').getAttribute('data-code')).resolves.toBe('invite_used');
    expect(await page.locator('[data-test=link-refused]').innerText()).toMatch(/already been used/);
    await page.close();
  });

  it('resets a forgotten password from the sign-in page', async () => {
    const page = await newPage(PHONE);
    await page.goto(`${demo.rt.url}/sign-in`);
    await page.locator('[data-test=sign-in-forgot]').click();
    await page.waitForURL((u) => u.pathname === '/forgot-password');
    await page.locator('[data-test=reset-email]').fill(INVITEE.email);
    await page.locator('[data-test=reset-submit]').click();
    expect(await page.locator('[data-test=reset-sent]').innerText()).toMatch(/if .*account/i);
    await screenshot(page, 'forgot-password-phone');

    const mail = await smtp().waitFor((m) => m.envelopeTo.includes(INVITEE.email) && m.text.includes('/reset-password?'), 10_000);
    const link = linkIn(mail, 'reset-password');
    await page.goto(link);
    await setPassword(page, SECOND_PASSWORD);
    await page.waitForURL((u) => u.pathname === '/');
    await page.close();

    // Only the new password works now.
    const old = await fetch(`${demo.rt.url}/api/auth/sign-in`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ email: INVITEE.email, password: FIRST_PASSWORD }) });
    expect(old.status).toBe(401);

    // A made-up link says what to do.
    const again = await newPage();
    await again.goto(`${demo.rt.url}/reset-password?token=${'x'.repeat(40)}`);
    await setPassword(again, 'some other long phrase');
    await again.locator('[data-test=link-refused]').waitFor();
    expect(await again.locator('[data-test=link-refused]').innerText()).toMatch(/not valid/);
    await again.locator('[data-test=link-new-reset]').waitFor();
    await again.close();
  });
});

describe('tokens, webhooks, audit and the API reference', () => {
  let page: Page;
  beforeAll(async () => {
    page = await newPage();
    await signIn(page, 'admin@runnel.test');
  });
  afterAll(async () => page?.close());

  it('shows the invited person as active', async () => {
    await page.locator('[data-test=nav-people]').click();
    const row = rowOf(page, INVITEE.email);
    await row.waitFor();
    await expect(row.locator('[data-test=person-status]').getAttribute('data-status')).resolves.toBe('active');
  });

  it('makes an API token, shows it once, and it works as a Bearer token until revoked', async () => {
    await page.locator('[data-test=nav-tokens]').click();
    await page.waitForURL((u) => u.pathname === '/tokens');
    await page.locator('[data-test=token-create]').click();
    await page.locator('[data-test=token-name]').fill('Water report export');
    await page.locator('[data-test=token-role-owner]').click();
    await page.locator('[data-test=form-save]').click();
    // An owner token needs a site: the shared rule says so on the field.
    await fieldOf(page, 'token-sites').getByText('A technician or owner token needs at least one site').waitFor();
    await page.locator('[data-test=token-role-manager]').click();
    await page.locator('[data-test=form-save]').click();

    const secret = (await page.locator('[data-test=token-secret]').innerText()).trim();
    expect(secret).toMatch(/^rnt_/);
    expect(await page.locator('[data-test=secret-warning]').innerText()).toMatch(/You will not see this again/);
    await page.locator('[data-test=token-secret-copy]').waitFor();
    await screenshot(page, 'token-secret-desktop');

    const res = await bearer(secret);
    expect(res.status).toBe(200);
    expect(((await res.json()) as { items: unknown[] }).items.length).toBeGreaterThan(0);

    await page.locator('[data-test=secret-done]').click();
    await page.locator('[data-test=secret-dialog]').waitFor({ state: 'detached' });
    const row = page.locator('[data-test=token-row][data-name="Water report export"]');
    await row.waitFor();
    expect(await page.content()).not.toContain(secret);
    await page.reload();
    await row.waitFor();
    expect(await page.content()).not.toContain(secret);
    expect(await row.innerText()).toContain(secret.slice(0, 12));
    await screenshot(page, 'tokens-desktop');

    await row.locator('[data-test=token-revoke]').click();
    await page.locator('[data-test=confirm-ok]').click();
    await row.locator('[data-test=token-state][data-state=revoked]').waitFor();
    expect((await bearer(secret)).status).toBe(401);
  });

  it('adds a webhook, shows its signing secret once, pauses it and lists its deliveries', async () => {
    await page.locator('[data-test=nav-webhooks]').click();
    await page.waitForURL((u) => u.pathname === '/webhooks');
    await page.locator('[data-test=webhook-create]').click();
    await page.locator('[data-test=webhook-url]').fill('ftp://example.org/x');
    await page.locator('[data-test=form-save]').click();
    await fieldOf(page, 'webhook-url').getByText(/must start with http/).waitFor();
    await page.locator('[data-test=webhook-url]').fill('http://127.0.0.1:9/runnel-hook');
    await page.locator('[data-test=webhook-event-rain]').click();
    await page.locator('[data-test=form-save]').click();
    const secret = (await page.locator('[data-test=webhook-secret]').innerText()).trim();
    expect(secret).toMatch(/^whsec_/);
    await page.locator('[data-test=secret-done]').click();

    const card = page.locator('[data-test=webhook-card][data-url="http://127.0.0.1:9/runnel-hook"]');
    await card.waitFor();
    expect(await card.innerText()).toMatch(/Valves[\s\S]*Alerts[\s\S]*Rain/);
    await card.locator('[data-test=webhook-toggle]').click();
    await card.getByText('Paused').waitFor();
    const hooks = await page.evaluate(async () => (await fetch('/api/webhooks')).json());
    expect(hooks.items[0]).toMatchObject({ url: 'http://127.0.0.1:9/runnel-hook', enabled: false, events: ['valve', 'alert', 'rain'] });
    await card.locator('[data-test=webhook-deliveries-toggle]').click();
    await card.locator('[data-test=webhook-deliveries-empty], [data-test=webhook-delivery]').first().waitFor();
    expect(await page.content()).not.toContain(secret);
    await screenshot(page, 'webhooks-desktop');
  });

  it('lists sign-ins in the audit log, filters by action and shows before and after', async () => {
    await page.locator('[data-test=nav-audit]').click();
    await page.waitForURL((u) => u.pathname === '/audit');
    await page.locator('[data-test=audit-row]').first().waitFor();
    const actions = await page.locator('[data-test=audit-row]').evaluateAll((rows) => rows.map((r) => r.getAttribute('data-action')));
    expect(actions).toContain('auth.sign_in');
    expect(actions).toContain('api_token.revoke');

    await page.locator('[data-test=audit-filter-action]').fill('auth.sign_in');
    await page.keyboard.press('Escape');
    await page.waitForFunction(() => {
      const rows = [...document.querySelectorAll('[data-test=audit-row]')];
      return rows.length > 0 && rows.every((r) => r.getAttribute('data-action') === 'auth.sign_in');
    });
    const who = await page.locator('[data-test=audit-who]').allInnerTexts();
    expect(who).toContain('admin@runnel.test');
    expect(who).toContain(INVITEE.email);

    // An action the server cannot read: its message sits on the field.
    await page.locator('[data-test=audit-filter-action]').fill('Not An Action!');
    await fieldOf(page, 'audit-filter-action').getByText('Actions look like zone.update or valve.*').waitFor();

    await page.locator('[data-test=audit-filter-action]').fill('user.invite');
    await page.keyboard.press('Escape');
    await page.waitForFunction(() => {
      const rows = [...document.querySelectorAll('[data-test=audit-row]')];
      return rows.length === 1 && rows[0].getAttribute('data-action') === 'user.invite';
    });
    await page.locator('[data-test=audit-expand]').first().click();
    const detail = page.locator('[data-test=audit-detail]').first();
    await detail.waitFor();
    const change = await detail.locator('[data-test=audit-change-row]').allInnerTexts();
    expect(change.join('\n')).toContain(INVITEE.email);
    await screenshot(page, 'audit-desktop');
  });

  it('lists the routes in the API reference, with the zone start among them', async () => {
    await page.locator('[data-test=nav-api]').click();
    await page.waitForURL((u) => u.pathname === '/api-docs');
    const start = page.locator('[data-test=api-op][data-path="/api/zones/{id}/start"][data-method=post]');
    await start.waitFor();
    expect(await page.locator('[data-test=api-group]').count()).toBeGreaterThan(5);
    await page.locator('[data-test=api-op][data-path="/api/users/invitations"]').click();
    const fields = await page.locator('[data-test=api-op][data-path="/api/users/invitations"] [data-test=schema-field]').evaluateAll((els) => els.map((e) => e.getAttribute('data-name')));
    expect(fields).toEqual(expect.arrayContaining(['email', 'name', 'role', 'siteIds']));
    await page.locator('[data-test=api-search]').fill('zones start');
    await page.waitForFunction(() => document.querySelectorAll('[data-test=api-op]').length < 5);
    await start.waitFor();
    await screenshot(page, 'api-docs-desktop');
  });

  it('fits a phone', async () => {
    await page.setViewportSize(PHONE);
    for (const [path, ready, name] of [
      ['/people', '[data-test=people-row]', 'people-phone'],
      ['/tokens', '[data-test=token-row]', 'tokens-phone'],
      ['/webhooks', '[data-test=webhook-card]', 'webhooks-phone'],
      ['/audit', '[data-test=audit-row]', 'audit-phone'],
      ['/api-docs', '[data-test=api-op]', 'api-docs-phone'],
    ] as const) {
      await page.goto(`${demo.rt.url}${path}`);
      await page.locator(ready).first().waitFor();
      // Nothing wider than the screen.
      const width = await page.evaluate(() => document.documentElement.scrollWidth);
      expect(width, path).toBeLessThanOrEqual(PHONE.width);
      await screenshot(page, name);
    }
  });
});

describe('what other roles see', () => {
  it('keeps the demo technician out of the admin screens', async () => {
    const page = await newPage(PHONE);
    await signIn(page, 'tech@runnel.test');
    await page.locator('[data-test=nav-fleet]').waitFor({ state: 'attached' });
    for (const key of ['people', 'tokens', 'webhooks', 'api']) expect(await page.locator(`[data-test=nav-${key}]`).count()).toBe(0);
    for (const path of ['/people', '/tokens', '/webhooks', '/api-docs']) {
      await page.goto(`${demo.rt.url}${path}`);
      await page.waitForURL((u) => u.pathname === '/');
    }
    await page.close();
  });

  it('gives a manager the API reference and the audit log but not People', async () => {
    const page = await newPage();
    await signIn(page, 'manager@runnel.test');
    await page.locator('[data-test=nav-api]').waitFor();
    await page.locator('[data-test=nav-audit]').waitFor();
    expect(await page.locator('[data-test=nav-people]').count()).toBe(0);
    await page.close();
  });

  it('asks nothing of any host but 127.0.0.1', () => {
    expect(foreign).toEqual([]);
  });
});
