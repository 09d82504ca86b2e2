import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import { DateTime } from 'luxon';
import { sql } from 'drizzle-orm';
import { runs, siteMembers, users, weatherDays, zoneRuns } from '../../server/db/schema/index';
import { hashPassword } from '../../server/services/auth';
import { watchOf, type WatchParts } from '../../server/alerts/watch';
import { rebuildRollups } from '../../server/history/rollup';
import { parseMail } from '../../server/mail/mime';
import { PASSWORD } from '../helpers/fixtures';
import { sessionCookie, startLiveWorld, type LiveWorld } from '../helpers/live';
import type { CaughtMail } from '../../server/mail/fake-smtp';
import { MailService, mailSchedule } from '../../server/mail/service';
import { createNullMailer } from '../../server/mail/mailer';
import { queueAlertMail } from '../../server/mail/alert-mail';
import { realClock } from '../../server/clock';

let w: LiveWorld;
let parts: WatchParts;
let ownerB: { id: number; email: string };
let ownerOptedOut: { id: number; email: string };
const cookies: Record<string, string> = {};

beforeAll(async () => {
  w = await startLiveWorld({ RUNNEL_DEMO: '1', ALERTS: '0', ALERT_MAIL_THROTTLE_MINUTES: '10', MAIL_TICK_MS: '3600000', FIRM_NAME: 'Greenline Grounds', PUBLIC_URL: 'https://runnel.greenline.test' });
  parts = watchOf(w.rt.services)!;
  const hash = await hashPassword(PASSWORD);
  const [b] = await w.tdb.db.insert(users).values({ email: 'owner-b@fixture.test', name: 'Owner of B', role: 'owner', passwordHash: hash }).returning();
  const [o] = await w.tdb.db.insert(users).values({ email: 'quiet-owner@fixture.test', name: 'Quiet owner', role: 'owner', passwordHash: hash }).returning();
  await w.tdb.db.insert(siteMembers).values([{ siteId: w.f.siteB, userId: b.id }, { siteId: w.f.siteA, userId: o.id }]);
  ownerB = { id: b.id, email: b.email };
  ownerOptedOut = { id: o.id, email: o.email };
  for (const [who, email] of Object.entries({ admin: w.f.users.admin.email, manager: w.f.users.manager.email, technician: w.f.users.technician.email, owner: w.f.users.owner.email, quiet: o.email, ownerB: b.email })) {
    cookies[who] = await sessionCookie(w.rt.url, email);
  }
});
afterAll(async () => {
  await w.close();
});

const put = (who: string, body: object) => request(w.rt.url).put('/api/me/mail-preferences').set('cookie', cookies[who]).send(body);
const get = (who: string, path: string) => request(w.rt.url).get(path).set('cookie', cookies[who]);
const to = (m: CaughtMail) => m.envelopeTo.join(',');
const mailsTo = (email: string) => parts.fakeSmtp!.messages().filter((m) => m.envelopeTo.includes(email));

async function raise(siteId: number, kind: 'controller_offline' | 'low_voltage' | 'command_failed', subject: string) {
  const controllerId = siteId === w.f.siteA ? w.f.controllerA : w.f.controllerB;
  const r = await parts.store.raise({ kind, subject, siteId, controllerId, title: `Test ${kind} at ${siteId === w.f.siteA ? 'Test Site A' : 'Test Site B'}`, message: `Something about ${subject}` });
  await parts.mail.idle();
  return r.alert;
}

describe('mail preferences', () => {
  it('start from the role’s defaults and save what the person chooses', async () => {
    const mgr = await get('manager', '/api/me/mail-preferences');
    expect(mgr.status).toBe(200);
    expect(mgr.body).toMatchObject({ alertDelivery: 'immediate', weeklySummary: false, isDefault: true, email: w.f.users.manager.email });
    expect((await get('owner', '/api/me/mail-preferences')).body).toMatchObject({ alertDelivery: 'off', weeklySummary: true });
    expect((await get('technician', '/api/me/mail-preferences')).body).toMatchObject({ alertDelivery: 'daily_digest' });
    expect((await put('owner', { alertKinds: ['controller_offline', 'low_voltage'], alertDelivery: 'immediate', weeklySummary: true })).status).toBe(200);
    expect((await put('admin', { alertKinds: ['low_voltage'], alertDelivery: 'immediate', weeklySummary: false })).status).toBe(200);
    expect((await put('quiet', { alertKinds: [], alertDelivery: 'off', weeklySummary: false })).status).toBe(200);
    expect((await get('owner', '/api/me/mail-preferences')).body).toMatchObject({ alertKinds: ['controller_offline', 'low_voltage'], alertDelivery: 'immediate', isDefault: false });
    expect((await put('owner', { alertKinds: ['fire'], alertDelivery: 'immediate', weeklySummary: true })).status).toBe(400);
    expect((await put('owner', { alertKinds: [], alertDelivery: 'hourly', weeklySummary: true })).status).toBe(400);
  });
});

describe('alert mail', () => {
  it('goes at once to the people who want that kind and may see the site, and to nobody else', async () => {
    parts.fakeSmtp!.clear();
    await raise(w.f.siteA, 'controller_offline', 'controller:a-test-1');
    const got = parts.fakeSmtp!.messages();
    // manager (default: every problem kind) and site A's owner (opted in); not the admin (low voltage only),
    // not the technician (digest), not the quiet owner (off), not site B's owner.
    expect(got.map(to).sort()).toEqual([w.f.users.manager.email, w.f.users.owner.email].sort());
    const m = got.find((x) => to(x) === w.f.users.owner.email)!;
    expect(m.subject).toBe('[Greenline Grounds] Test controller_offline at Test Site A');
    expect(m.text).toContain('Greenline Grounds');
    expect(m.text).toContain('https://runnel.greenline.test/alerts');
    expect(m.html).toContain('<a href="https://runnel.greenline.test/alerts">');
    expect(m.text).toContain('Test Site A');
    expect(m.from).toContain('runnel@localhost');
  });

  it('never mails an owner about a site they are not a member of', async () => {
    parts.fakeSmtp!.clear();
    await put('ownerB', { alertKinds: ['low_voltage'], alertDelivery: 'immediate', weeklySummary: true });
    await raise(w.f.siteB, 'low_voltage', 'controller:b-test-1');
    expect(parts.fakeSmtp!.messages().map(to).sort()).toEqual([w.f.users.admin.email, w.f.users.manager.email, ownerB.email].sort());
    expect(mailsTo(w.f.users.owner.email)).toEqual([]);
    expect(mailsTo(w.f.users.technician.email)).toEqual([]);
    for (const m of parts.fakeSmtp!.messages()) expect(m.text).not.toContain('Test Site A');
  });

  it('throttles per person and kind: a flapping controller sends one mail, then one more with the rest', async () => {
    parts.fakeSmtp!.clear();
    const t0 = Date.now();
    for (let i = 0; i < 6; i++) await raise(w.f.siteA, 'command_failed', `controller:flap-${i}`);
    const first = mailsTo(w.f.users.manager.email);
    expect(first).toHaveLength(1);
    await parts.mail.flush(t0 + 5 * 60_000);
    expect(mailsTo(w.f.users.manager.email)).toHaveLength(1);
    await parts.mail.flush(t0 + 11 * 60_000);
    const all = mailsTo(w.f.users.manager.email);
    expect(all).toHaveLength(2);
    expect(all[1].subject).toBe('[Greenline Grounds] 5 alerts: command not carried out');
    // owner A asked only for offline and low voltage
    expect(mailsTo(w.f.users.owner.email)).toEqual([]);
  });

  it('gathers digest-mode people’s alerts into one daily digest', async () => {
    parts.fakeSmtp!.clear();
    const n = await parts.mail.digests(Date.now());
    expect(n).toBe(1);
    const [d] = parts.fakeSmtp!.messages();
    expect(to(d)).toBe(w.f.users.technician.email);
    expect(d.subject).toMatch(/^\[Greenline Grounds\] Daily alert digest, \d{4}-\d{2}-\d{2}: 7 alerts$/);
    expect(d.text).toContain('Test controller_offline at Test Site A');
    expect(d.text).not.toContain('Test Site B');
    // once a day
    await raise(w.f.siteA, 'controller_offline', 'controller:a-test-2');
    expect(await parts.mail.digests(Date.now())).toBe(0);
    expect(await parts.mail.digests(Date.now() + 86_400_000)).toBe(1);
  });

  it('is sent once when two instances share the queue: the second sender waits for the lock and finds it done', async () => {
    // A second instance's mail service: its own object on the same database and SMTP server.
    const other = new MailService({ ...parts.mail.ctx }, realClock, mailSchedule(w.rt.config));
    await raise(w.f.siteA, 'controller_offline', 'controller:a-test-3');
    parts.fakeSmtp!.clear();
    const later = Date.now() + 3 * 86_400_000;
    const [a, b] = await Promise.all([parts.mail.digests(later), other.digests(later)]);
    expect(a + b).toBe(1);
    expect(mailsTo(w.f.users.technician.email)).toHaveLength(1);
    // and immediate alert mail: both flush the same queued item, one mail goes
    await put('admin', { alertKinds: ['low_voltage'], alertDelivery: 'immediate', weeklySummary: false });
    const r = await parts.store.raise({ kind: 'low_voltage', subject: 'controller:a-volts-2', siteId: w.f.siteA, controllerId: w.f.controllerA, title: 'Low supply voltage at Test Site A', message: 'twice?' });
    await queueAlertMail(w.tdb.db, r.alert, Date.now() + 3_600_000);
    await parts.mail.idle();
    parts.fakeSmtp!.clear();
    const [x, y] = await Promise.all([parts.mail.flush(Date.now() + 3_600_000), other.flush(Date.now() + 3_600_000)]);
    const caught = parts.fakeSmtp!.messages();
    expect(caught.length).toBe(x + y);
    expect(mailsTo(w.f.users.admin.email)).toHaveLength(1);
    // nobody got the same mail twice
    expect(new Set(caught.map((m) => `${to(m)} ${m.subject}`)).size).toBe(caught.length);
  });
});

describe('the weekly water-use summary', () => {
  const monday = DateTime.fromISO('2025-07-14T08:00:00', { zone: 'UTC' }).toMillis();

  beforeAll(async () => {
    const add = async (siteId: number, zoneId: number, controllerId: number, date: string, litres: number) => {
      const start = new Date(`${date}T12:00:00Z`);
      const [run] = await w.tdb.db.insert(runs).values({ siteId, kind: 'program', scheduledFor: start, state: 'completed' }).returning();
      await w.tdb.db.insert(zoneRuns).values({
        runId: run.id, siteId, zoneId, controllerId, position: 1, plannedStart: start, plannedEnd: new Date(start.getTime() + 600_000),
        plannedMinutes: 10, actualStart: start, actualEnd: new Date(start.getTime() + 600_000), actualMinutes: 10, estimatedLitres: 300, measuredLitres: litres, state: 'completed',
      });
    };
    await add(w.f.siteA, w.f.zoneA, w.f.controllerA, '2025-07-08', 1234);
    await add(w.f.siteA, w.f.zoneA, w.f.controllerA, '2025-07-10', 1000);
    await add(w.f.siteB, w.f.zoneB, w.f.controllerB, '2025-07-09', 777);
    await add(w.f.siteA, w.f.zoneA, w.f.controllerA, '2025-07-15', 9999); // this week: not in last week's summary
    await w.tdb.db.insert(weatherDays).values({ siteId: w.f.siteA, date: '2025-07-08', tmaxC: 30, tminC: 15, rainMm: 2, et0Mm: 6, et0Method: 'test', source: 'manual' });
    await rebuildRollups(w.tdb.db, { from: '2025-07-01', to: '2025-07-20' });
  });

  it('goes to each owner who wants it, holding only their own sites', async () => {
    parts.fakeSmtp!.clear();
    expect(await parts.mail.weekly(monday)).toBe(2);
    const a = mailsTo(w.f.users.owner.email);
    const b = mailsTo(ownerB.email);
    expect(a).toHaveLength(1);
    expect(b).toHaveLength(1);
    expect(mailsTo(ownerOptedOut.email)).toEqual([]);
    expect(mailsTo(w.f.users.manager.email)).toEqual([]);
    expect(a[0].subject).toBe('[Greenline Grounds] Water use 2025-07-07 to 2025-07-13: Test Site A');
    expect(a[0].text).toContain('2,234 L (measured)');
    expect(a[0].text).toContain('Zone A1: 2,234 L, 22.3 mm');
    expect(a[0].text).not.toContain('Test Site B');
    expect(a[0].text).not.toContain('Zone B1');
    expect(a[0].text).not.toContain('9,999');
    expect(a[0].html).toContain('Test Site A');
    expect(a[0].html).not.toContain('Test Site B');
    expect(a[0].text).toContain('https://runnel.greenline.test/sites/');
    expect(b[0].text).toContain('777 L');
    expect(b[0].text).not.toContain('Test Site A');
    // once a week
    expect(await parts.mail.weekly(monday + 3_600_000)).toBe(0);
  });
});

describe('the outbox page (demo mode, admins only)', () => {
  it('lists what the fake SMTP server caught, newest first', async () => {
    const res = await get('admin', '/api/mail/outbox?limit=5');
    expect(res.status).toBe(200);
    expect(res.body.smtpUrl).toMatch(/^smtp:\/\/127\.0\.0\.1:\d+$/);
    expect(res.body.items.length).toBeGreaterThan(0);
    expect(res.body.items[0]).toMatchObject({ id: expect.any(Number), envelopeTo: expect.any(Array), subject: expect.any(String), text: expect.any(String), html: expect.any(String) });
    const ids = res.body.items.map((m: { id: number }) => m.id);
    expect(ids).toEqual([...ids].sort((x, y) => y - x));
    expect((await get('manager', '/api/mail/outbox')).status).toBe(403);
    expect((await get('owner', '/api/mail/outbox')).status).toBe(403);
    expect((await request(w.rt.url).get('/api/mail/outbox')).status).toBe(401);
  });

  it('reads back quoted-printable and encoded-word mail', () => {
    const raw = 'Subject: =?UTF-8?Q?Water_use_=E2=80=94_caf=C3=A9?=\r\nContent-Type: multipart/alternative; boundary="b1"\r\n\r\n--b1\r\nContent-Type: text/plain; charset=utf-8\r\nContent-Transfer-Encoding: quoted-printable\r\n\r\nm=C2=B3 and a soft=\r\n break\r\n--b1\r\nContent-Type: text/html; charset=utf-8\r\nContent-Transfer-Encoding: base64\r\n\r\nPHA+aGk8L3A+\r\n--b1--\r\n';
    const m = parseMail(raw);
    expect(m.subject).toBe('Water use — café');
    expect(m.text.trim()).toBe('m³ and a soft break');
    expect(m.html).toBe('<p>hi</p>');
  });
});

describe('with nothing caught by mistake', () => {
  it('records each mail sent in the mail log', async () => {
    const r = await w.tdb.db.execute<{ n: number }>(sql`select count(*)::int as n from mail_log`);
    expect(r.rows[0].n).toBeGreaterThanOrEqual(8);
  });

  it('logs nothing as sent when no mail server is set (production without SMTP_URL), and keeps the queue', async () => {
    const unset = new MailService({ ...parts.mail.ctx, mailer: createNullMailer() }, realClock, mailSchedule(w.rt.config));
    const count = async (table: 'mail_log' | 'mail_queue') => (await w.tdb.db.execute<{ n: number }>(sql.raw(`select count(*)::int as n from ${table} where sent_at is not null`))).rows[0].n;
    const r = await parts.store.raise({ kind: 'controller_offline', subject: 'controller:nowhere-1', siteId: w.f.siteA, controllerId: w.f.controllerA, title: 'Offline at Test Site A', message: 'no mail server' });
    await parts.mail.idle();
    const [logged, sent] = [await count('mail_log'), await count('mail_queue')];
    await queueAlertMail(w.tdb.db, r.alert, Date.now() + 86_400_000);
    expect(await unset.flush(Date.now() + 86_400_000)).toBe(0);
    expect(await unset.digests(Date.now() + 5 * 86_400_000)).toBe(0);
    expect([await count('mail_log'), await count('mail_queue')]).toEqual([logged, sent]);
  });
});
