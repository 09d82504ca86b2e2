import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { eq, sql } from 'drizzle-orm';
import { users } from '../../server/db/schema/index';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { PASSWORD, seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
});
afterAll(async () => {
  await tdb.drop();
});

/** Move an e-mail's sign-in attempts back in time, as if that many minutes had passed. */
async function ageSignIns(email: string, minutes: number) {
  await tdb.db.execute(sql`update audit_log set at = at - make_interval(mins => ${minutes}) where action = 'auth.sign_in' and actor_label = ${email}`);
}

const cookieOf = (res: request.Response) => ([] as string[]).concat(res.headers['set-cookie'] ?? []).find((c) => c.startsWith('runnel.sid='));

describe('sign-in', () => {
  it('gives the same message for an unknown e-mail and a wrong password', async () => {
    const a = await request(app).post('/api/auth/sign-in').send({ email: 'nobody@fixture.test', password: 'whatever1' });
    const b = await request(app).post('/api/auth/sign-in').send({ email: f.users.manager.email, password: 'wrong-password' });
    expect(a.status).toBe(401);
    expect(b.status).toBe(401);
    expect(a.body.error).toEqual(b.body.error);
    expect(a.body.error.message).not.toMatch(/password is wrong|unknown|no such user/i);
  });

  it('sets an httpOnly, SameSite=Lax session cookie and stores the session in PostgreSQL', async () => {
    const res = await request(app).post('/api/auth/sign-in').send({ email: f.users.owner.email, password: PASSWORD });
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ email: f.users.owner.email, role: 'owner', siteIds: [f.siteA] });
    const cookie = cookieOf(res)!;
    expect(cookie).toMatch(/HttpOnly/i);
    expect(cookie).toMatch(/SameSite=Lax/i);
    const r = await tdb.db.execute(sql`select count(*)::int as n from sessions where sess::text like ${'%"userId":' + f.users.owner.id + '%'}`);
    expect(r.rows[0].n).toBeGreaterThanOrEqual(1);
  });

  it('rotates the session id at sign-in', async () => {
    const agent = request.agent(app);
    await agent.post('/api/auth/sign-in').send({ email: 'nobody@fixture.test', password: 'x' });
    const first = await agent.post('/api/auth/sign-in').send({ email: f.users.technician.email, password: PASSWORD });
    const second = await agent.post('/api/auth/sign-in').send({ email: f.users.technician.email, password: PASSWORD });
    const id1 = cookieOf(first)!.split(';')[0];
    const id2 = cookieOf(second)!.split(';')[0];
    expect(id1).not.toBe(id2);
    // the old id no longer signs anyone in
    const stale = await request(app).get('/api/auth/me').set('cookie', id1);
    expect(stale.status).toBe(401);
  });

  it('ends the session at sign-out', async () => {
    const agent = await signedIn(app, f.users.manager.email);
    expect((await agent.get('/api/auth/me')).status).toBe(200);
    expect((await agent.post('/api/auth/sign-out')).status).toBe(204);
    expect((await agent.get('/api/auth/me')).status).toBe(401);
  });

  it('stops a disabled user at their next request', async () => {
    const agent = await signedIn(app, f.users.technician.email);
    await tdb.db.update(users).set({ disabled: true }).where(eq(users.id, f.users.technician.id));
    expect((await agent.get('/api/sites')).status).toBe(401);
    await tdb.db.update(users).set({ disabled: false }).where(eq(users.id, f.users.technician.id));
  });

  it('slows an account down after five failed sign-ins and says so plainly', async () => {
    const email = f.users.admin.email;
    for (let i = 0; i < 5; i++) {
      expect((await request(app).post('/api/auth/sign-in').send({ email, password: `bad-${i}` })).status).toBe(401);
    }
    const locked = await request(app).post('/api/auth/sign-in').send({ email, password: PASSWORD });
    expect(locked.status).toBe(429);
    expect(locked.body.error).toEqual({ code: 'account_slowed', message: expect.stringMatching(/wait/i), details: null });
    const [row] = await tdb.db.select().from(users).where(eq(users.id, f.users.admin.id));
    expect(row.failedSignIns).toBe(5);
    expect(row.lockedUntil!.getTime()).toBeGreaterThan(Date.now());
    // Twenty minutes later the failures are out of the window and the right password works.
    await ageSignIns(email, 20);
    expect((await request(app).post('/api/auth/sign-in').send({ email, password: PASSWORD })).status).toBe(200);
    const [after] = await tdb.db.select().from(users).where(eq(users.id, f.users.admin.id));
    expect(after).toMatchObject({ failedSignIns: 0, lockedUntil: null });
  });

  it('answers an unknown e-mail exactly as a real account, before and after five failures', async () => {
    const known = f.users.technician.email;
    const unknown = 'nobody-at-all@fixture.test';
    const answers = async (email: string, password: string) => {
      const res = await request(app).post('/api/auth/sign-in').send({ email, password });
      return { status: res.status, body: res.body };
    };
    for (let i = 0; i < 5; i++) {
      const a = await answers(known, `wrong-${i}`);
      const b = await answers(unknown, `wrong-${i}`);
      expect(a.status).toBe(401);
      expect(b).toEqual(a);
    }
    // The sixth try: slowed alike, even with the real account's right password.
    const a = await answers(known, PASSWORD);
    const b = await answers(unknown, PASSWORD);
    expect(a).toEqual({ status: 429, body: { error: { code: 'account_slowed', message: expect.stringMatching(/wait/i), details: null } } });
    expect(b).toEqual(a);
    const r = await tdb.db.execute(sql`select actor_label as who, outcome, count(*)::int as n from audit_log
      where action = 'auth.sign_in' and outcome <> 'ok' and actor_label in (${known}, ${unknown}) group by 1, 2 order by 1, 2`);
    expect(r.rows).toEqual([
      { who: unknown, outcome: 'failed', n: 5 }, { who: unknown, outcome: 'locked', n: 1 },
      { who: known, outcome: 'failed', n: 5 }, { who: known, outcome: 'locked', n: 1 },
    ].sort((x, y) => x.who.localeCompare(y.who)));
    await ageSignIns(known, 20);
  });

  it('slows an e-mail however it is written: spaces and capitals are the same address', async () => {
    const email = 'spelled@fixture.test';
    const spellings = [email, ' Spelled@Fixture.test ', 'SPELLED@FIXTURE.TEST', '\tspelled@fixture.TEST', ' spelled@fixture.test'];
    for (const e of spellings) expect((await request(app).post('/api/auth/sign-in').send({ email: e, password: 'nope' })).status).toBe(401);
    expect((await request(app).post('/api/auth/sign-in').send({ email: '  SpElLeD@fixture.test', password: 'nope' })).status).toBe(429);
    // another address is not touched
    expect((await request(app).post('/api/auth/sign-in').send({ email: 'spelled2@fixture.test', password: 'nope' })).status).toBe(401);
  });

  it('counts only failures since the last good sign-in', async () => {
    const email = f.users.manager.email;
    for (let i = 0; i < 4; i++) await request(app).post('/api/auth/sign-in').send({ email, password: `bad-${i}` });
    expect((await request(app).post('/api/auth/sign-in').send({ email, password: PASSWORD })).status).toBe(200);
    for (let i = 0; i < 4; i++) {
      expect((await request(app).post('/api/auth/sign-in').send({ email, password: `bad-again-${i}` })).status).toBe(401);
    }
    expect((await request(app).post('/api/auth/sign-in').send({ email, password: PASSWORD })).status).toBe(200);
  });

  it('stores passwords as argon2id hashes', async () => {
    const [u] = await tdb.db.select().from(users).where(eq(users.id, f.users.owner.id));
    expect(u.passwordHash).toMatch(/^\$argon2id\$/);
  });

  it('records sign-ins in the audit log, successful and failed', async () => {
    const r = await tdb.db.execute(sql`select outcome, count(*)::int as n from audit_log where action = 'auth.sign_in' group by outcome`);
    const by = Object.fromEntries(r.rows.map((x) => [x.outcome, x.n]));
    expect(by.ok).toBeGreaterThan(0);
    expect(by.failed).toBeGreaterThan(0);
  });
});

describe('sign-in rate limit', () => {
  it('answers 429 once an address has tried too often for one e-mail', async () => {
    const limited = buildTestApp(tdb, { LOGIN_RATE_LIMIT: '3' }).app;
    const codes: number[] = [];
    for (let i = 0; i < 5; i++) {
      codes.push((await request(limited).post('/api/auth/sign-in').send({ email: 'flood@fixture.test', password: 'x' })).status);
    }
    expect(codes.slice(0, 3)).toEqual([401, 401, 401]);
    expect(codes.slice(3)).toEqual([429, 429]);
  });

  it('answers its 429 in the one error shape', async () => {
    const limited = buildTestApp(tdb, { LOGIN_RATE_LIMIT: '1' }).app;
    await request(limited).post('/api/auth/sign-in').send({ email: 'shape@fixture.test', password: 'x' });
    const res = await request(limited).post('/api/auth/sign-in').send({ email: 'shape@fixture.test', password: 'x' });
    expect(res.status).toBe(429);
    expect(res.body).toEqual({ error: { code: 'rate_limited', message: expect.stringMatching(/wait a minute/i), details: null } });
  });

  it('keys the limit by the e-mail as sign-in reads it, so " Admin@X " shares it with "admin@x"', async () => {
    const limited = buildTestApp(tdb, { LOGIN_RATE_LIMIT: '3' }).app;
    const tryAs = async (email: string) => (await request(limited).post('/api/auth/sign-in').send({ email, password: 'x' })).status;
    expect(await tryAs('admin@x.test')).toBe(401);
    expect(await tryAs(' Admin@X.test ')).toBe(401);
    expect(await tryAs('ADMIN@x.TEST')).toBe(401);
    expect(await tryAs('  admin@X.test')).toBe(429);
    expect(await tryAs('admin@x.test')).toBe(429);
    // the limit is per e-mail: another address from the same place still gets an answer
    expect(await tryAs('someone-else@x.test')).toBe(401);
  });
});
