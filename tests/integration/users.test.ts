import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { eq, sql } from 'drizzle-orm';
import { accountTokens, siteMembers, users } from '../../server/db/schema/index';
import { startFakeSmtp, type CaughtMail, type FakeSmtp } from '../../server/mail/fake-smtp';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { PASSWORD, seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;
let smtp: FakeSmtp;
let admin: Awaited<ReturnType<typeof signedIn>>;

const GOOD_PASSWORD = 'gravel-path-sprinkler-42';

beforeAll(async () => {
  smtp = await startFakeSmtp({ port: 0 });
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb, { SMTP_URL: smtp.url, PUBLIC_URL: 'https://runnel.example.test' }).app;
  admin = await signedIn(app, f.users.admin.email);
});
afterAll(async () => {
  await tdb.drop();
  await smtp.close();
});
beforeEach(() => smtp.clear());

/** The one-time token in a link of a caught mail. */
function tokenIn(m: CaughtMail, page: 'accept-invite' | 'reset-password'): string {
  const match = new RegExp(`https://runnel\\.example\\.test/${page}\\?token=([A-Za-z0-9_-]+)`).exec(m.text);
  if (!match) throw new Error(`no ${page} link in: ${m.text}`);
  return match[1];
}

async function inviteSomeone(email: string, role = 'technician', siteIds = [f.siteA]) {
  const res = await admin.post('/api/users/invitations').send({ email, name: 'New Person', role, siteIds });
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  const mail = await smtp.waitFor((m) => m.envelopeTo.includes(email));
  return { res, mail, token: tokenIn(mail, 'accept-invite') };
}

describe('invitations', () => {
  it('mails a link that sets the password once; the person can then sign in and sees their sites', async () => {
    const { res, mail, token } = await inviteSomeone('ines@crew.test');
    expect(res.body).toMatchObject({ user: { email: 'ines@crew.test', role: 'technician', status: 'invited', siteIds: [f.siteA] }, mailed: true });
    expect(mail.subject).toMatch(/invited/i);
    expect(mail.text).toMatch(/expires/);
    // only the hash is stored
    const rows = await tdb.db.select().from(accountTokens).where(eq(accountTokens.userId, res.body.user.id));
    expect(rows).toHaveLength(1);
    expect(rows[0].tokenHash).not.toContain(token);
    expect(rows[0].tokenHash).toMatch(/^[0-9a-f]{64}$/);
    // not activated yet: no sign-in
    expect((await request(app).post('/api/auth/sign-in').send({ email: 'ines@crew.test', password: GOOD_PASSWORD })).status).toBe(401);

    const ok = await request(app).post('/api/auth/accept-invite').send({ token, password: GOOD_PASSWORD });
    expect(ok.status, JSON.stringify(ok.body)).toBe(200);
    expect(ok.body).toEqual({ email: 'ines@crew.test' });
    const again = await request(app).post('/api/auth/accept-invite').send({ token, password: 'another-long-password' });
    expect(again.status).toBe(400);
    expect(again.body.error.code).toBe('invite_used');
    expect(again.body.error.message).toMatch(/already been used/);

    const agent = await signedIn(app, 'ines@crew.test', GOOD_PASSWORD);
    const me = await agent.get('/api/auth/me');
    expect(me.body).toMatchObject({ role: 'technician', siteIds: [f.siteA] });
    expect((await agent.get(`/api/sites/${f.siteB}`)).status).toBe(404);
    const list = await admin.get('/api/users');
    expect(list.body.items.find((u: { email: string }) => u.email === 'ines@crew.test')).toMatchObject({ status: 'active', invitation: null });
  });

  it('refuses an expired link with a clear message', async () => {
    const { res, token } = await inviteSomeone('late@crew.test');
    await tdb.db.update(accountTokens).set({ expiresAt: new Date(Date.now() - 1000) }).where(eq(accountTokens.userId, res.body.user.id));
    const r = await request(app).post('/api/auth/accept-invite').send({ token, password: GOOD_PASSWORD });
    expect(r.status).toBe(400);
    expect(r.body.error).toMatchObject({ code: 'invite_expired' });
    expect(r.body.error.message).toMatch(/expired/);
    expect((await admin.get('/api/users')).body.items.find((u: { id: number }) => u.id === res.body.user.id).status).toBe('invite_expired');
  });

  it('resend gives a new link and the old one stops working; revoke withdraws it', async () => {
    const { res, token: first } = await inviteSomeone('twice@crew.test');
    smtp.clear();
    const resend = await admin.post(`/api/users/${res.body.user.id}/invitation/resend`);
    expect(resend.status).toBe(200);
    const second = tokenIn(await smtp.waitFor((m) => m.envelopeTo.includes('twice@crew.test')), 'accept-invite');
    expect(second).not.toBe(first);
    const old = await request(app).post('/api/auth/accept-invite').send({ token: first, password: GOOD_PASSWORD });
    expect(old.body.error.code).toBe('invite_revoked');

    const revoke = await admin.delete(`/api/users/${res.body.user.id}/invitation`);
    expect(revoke.status).toBe(200);
    expect(revoke.body).toMatchObject({ status: 'disabled', disabled: true });
    const r = await request(app).post('/api/auth/accept-invite').send({ token: second, password: GOOD_PASSWORD });
    expect(r.status).toBe(400);
    expect(r.body.error.code).toBe('invite_revoked');
    expect(r.body.error.message).toMatch(/withdrawn/);
  });

  it('refuses a second person with the same e-mail and a made-up token', async () => {
    const dup = await admin.post('/api/users/invitations').send({ email: f.users.owner.email, name: 'Dup', role: 'owner', siteIds: [] });
    expect(dup.status).toBe(409);
    expect(dup.body.error.code).toBe('email_taken');
    const bad = await request(app).post('/api/auth/accept-invite').send({ token: 'x'.repeat(43), password: GOOD_PASSWORD });
    expect(bad.status).toBe(400);
    expect(bad.body.error.code).toBe('invite_invalid');
  });

  it('applies the password rules with plain messages, and never echoes the password', async () => {
    const { token } = await inviteSomeone('rules@crew.test');
    const tryPw = (password: string) => request(app).post('/api/auth/accept-invite').send({ token, password });
    const cases: [string, RegExp][] = [
      ['short-pw', /at least 10/],
      ['x'.repeat(201), /at most 200/],
      ['password123', /commonly used/],
      ['my-rules-are-long', /e-mail/],
      ['aaaaaaaaaaaaab', /more than one or two/],
    ];
    for (const [pw, msg] of cases) {
      const r = await tryPw(pw);
      expect(r.status, pw).toBe(400);
      expect(r.body.error.details[0]).toMatchObject({ path: 'password' });
      expect(r.body.error.details[0].message).toMatch(msg);
      expect(JSON.stringify(r.body)).not.toContain(pw);
    }
    // still usable after refusals
    expect((await tryPw(GOOD_PASSWORD)).status).toBe(200);
  });
});

describe('password reset', () => {
  it('answers 202 whether or not the address exists, and mails only real accounts', async () => {
    const real = await request(app).post('/api/auth/password-reset').send({ email: f.users.manager.email });
    const fake = await request(app).post('/api/auth/password-reset').send({ email: 'nobody@nowhere.test' });
    expect(real.status).toBe(202);
    expect(fake.status).toBe(202);
    expect(real.body).toEqual(fake.body);
    await smtp.waitFor((m) => m.envelopeTo.includes(f.users.manager.email));
    await new Promise((r) => setTimeout(r, 300));
    expect(smtp.messages().filter((m) => m.envelopeTo.includes('nobody@nowhere.test'))).toHaveLength(0);
  });

  it('sets a new password through the link once, ends the old sessions, and the link cannot be reused', async () => {
    const email = f.users.owner.email;
    const old = await signedIn(app, email);
    expect((await old.get('/api/auth/me')).status).toBe(200);
    await request(app).post('/api/auth/password-reset').send({ email });
    const token = tokenIn(await smtp.waitFor((m) => m.envelopeTo.includes(email)), 'reset-password');
    const done = await request(app).post('/api/auth/password-reset/confirm').send({ token, password: GOOD_PASSWORD });
    expect(done.status, JSON.stringify(done.body)).toBe(200);
    expect((await old.get('/api/auth/me')).status).toBe(401);
    expect((await request(app).post('/api/auth/sign-in').send({ email, password: PASSWORD })).status).toBe(401);
    await signedIn(app, email, GOOD_PASSWORD);
    const again = await request(app).post('/api/auth/password-reset/confirm').send({ token, password: 'yet-another-password-9' });
    expect(again.status).toBe(400);
    expect(again.body.error.code).toBe('reset_used');
    // put the fixture password back for the other tests
    const { hashPassword } = await import('../../server/services/auth');
    await tdb.db.update(users).set({ passwordHash: await hashPassword(PASSWORD) }).where(eq(users.email, email));
  });

  it('refuses an expired reset link', async () => {
    const email = f.users.technician.email;
    await request(app).post('/api/auth/password-reset').send({ email });
    const token = tokenIn(await smtp.waitFor((m) => m.envelopeTo.includes(email)), 'reset-password');
    await tdb.db.execute(sql`update account_tokens set expires_at = now() - interval '1 second' where purpose = 'reset' and used_at is null`);
    const r = await request(app).post('/api/auth/password-reset/confirm').send({ token, password: GOOD_PASSWORD });
    expect(r.status).toBe(400);
    expect(r.body.error).toMatchObject({ code: 'reset_expired' });
  });

  it('is rate-limited per address and e-mail', async () => {
    const limited = buildTestApp(tdb, { SMTP_URL: smtp.url, RESET_RATE_LIMIT: '2' }).app;
    const codes: number[] = [];
    for (let i = 0; i < 4; i++) codes.push((await request(limited).post('/api/auth/password-reset').send({ email: 'flood@nowhere.test' })).status);
    expect(codes).toEqual([202, 202, 429, 429]);
  });
});

describe('changing people', () => {
  async function person(email: string, role: 'admin' | 'manager' | 'technician' | 'owner') {
    const { hashPassword } = await import('../../server/services/auth');
    const [u] = await tdb.db.insert(users).values({ email, name: email, role, passwordHash: await hashPassword(PASSWORD) }).returning();
    return u.id;
  }

  it('changes role, name and sites, and audits the change with before and after', async () => {
    const id = await person('mover@crew.test', 'owner');
    const r = await admin.patch(`/api/users/${id}`).send({ role: 'technician', siteIds: [f.siteA, f.siteB], name: 'Mover' });
    expect(r.status).toBe(200);
    expect(r.body).toMatchObject({ role: 'technician', name: 'Mover', siteIds: [f.siteA, f.siteB].sort((a, b) => a - b) });
    const members = await tdb.db.select().from(siteMembers).where(eq(siteMembers.userId, id));
    expect(members).toHaveLength(2);
    const audit = await admin.get(`/api/audit?action=user.update&entityType=user`);
    const entry = audit.body.items.find((e: { entityId: string }) => e.entityId === String(id));
    expect(entry.before).toMatchObject({ role: 'owner' });
    expect(entry.after).toMatchObject({ role: 'technician' });
    expect(entry.ip).toBeTruthy();
  });

  it('ends a disabled person’s sessions at once (their rows leave the sessions table)', async () => {
    const id = await person('leaver@crew.test', 'manager');
    const agent = await signedIn(app, 'leaver@crew.test');
    const count = async () => (await tdb.db.execute(sql`select count(*)::int as n from sessions where sess->>'userId' = ${String(id)}`)).rows[0].n;
    expect(await count()).toBe(1);
    const r = await admin.patch(`/api/users/${id}`).send({ disabled: true });
    expect(r.body.status).toBe('disabled');
    expect(await count()).toBe(0);
    expect((await agent.get('/api/sites')).status).toBe(401);
    expect((await request(app).post('/api/auth/sign-in').send({ email: 'leaver@crew.test', password: PASSWORD })).status).toBe(401);
  });

  it('never removes, disables or demotes the last admin', async () => {
    const me = f.users.admin.id;
    const demote = await admin.patch(`/api/users/${me}`).send({ role: 'manager' });
    expect(demote.status).toBe(409);
    expect(demote.body.error.code).toBe('last_admin');
    expect((await admin.patch(`/api/users/${me}`).send({ disabled: true })).status).toBe(409);
    const second = await person('second-admin@crew.test', 'admin');
    expect((await admin.patch(`/api/users/${second}`).send({ role: 'manager' })).status).toBe(200);
  });

  it('tells a slowed-down account plainly what is happening', async () => {
    const id = await person('slow@crew.test', 'owner');
    for (let i = 0; i < 5; i++) await request(app).post('/api/auth/sign-in').send({ email: 'slow@crew.test', password: `wrong-${i}-password` });
    const r = await request(app).post('/api/auth/sign-in').send({ email: 'slow@crew.test', password: PASSWORD });
    expect(r.status).toBe(429);
    expect(r.body.error.message).toBe('Too many failed sign-ins for this account. Wait a few minutes and try again.');
    const listed = (await admin.get('/api/users')).body.items.find((u: { id: number }) => u.id === id);
    expect(listed.lockedUntil).toBeTruthy();
  });

  it('keeps people admin-only', async () => {
    const mgr = await signedIn(app, f.users.manager.email);
    expect((await mgr.get('/api/users')).status).toBe(403);
    expect((await mgr.post('/api/users/invitations').send({ email: 'x@y.test', name: 'X', role: 'owner', siteIds: [] })).status).toBe(403);
  });
});
