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
    expect(locked.body.error.message).toMatch(/wait/i);
    await tdb.db.update(users).set({ lockedUntil: null, failedSignIns: 0 }).where(eq(users.id, f.users.admin.id));
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
});
