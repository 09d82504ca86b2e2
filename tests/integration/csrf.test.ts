import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { Writable } from 'node:stream';
import { pino } from 'pino';
import { eq } from 'drizzle-orm';
import { sites } from '../../server/db/schema/index';
import { createApp } from '../../server/app';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { testConfig } from '../helpers/config';
import { PASSWORD, seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;
let manager: Awaited<ReturnType<typeof signedIn>>;

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb, { PUBLIC_URL: 'https://runnel.example.test' }).app;
  manager = await signedIn(app, f.users.manager.email);
});
afterAll(async () => {
  await tdb.drop();
});

const notes = async () => (await tdb.db.select({ notes: sites.notes }).from(sites).where(eq(sites.id, f.siteA)))[0].notes;

describe('cross-site request forgery', () => {
  it('refuses a cookie-authenticated write whose Origin is another site, and changes nothing', async () => {
    const before = await notes();
    const res = await manager.patch(`/api/sites/${f.siteA}`).set('origin', 'https://evil.example').send({ notes: 'forged' });
    expect(res.status).toBe(403);
    expect(res.body.error.code).toBe('csrf');
    expect(await notes()).toBe(before);
  });

  it('refuses a write with a foreign Referer, or a browser saying cross-site without Origin', async () => {
    const a = await manager.patch(`/api/sites/${f.siteA}`).set('referer', 'https://evil.example/page').send({ notes: 'forged' });
    expect(a.status).toBe(403);
    const b = await manager.patch(`/api/sites/${f.siteA}`).set('sec-fetch-site', 'cross-site').send({ notes: 'forged' });
    expect(b.status).toBe(403);
    const c = await manager.patch(`/api/sites/${f.siteA}`).set('sec-fetch-site', 'same-site').send({ notes: 'forged' });
    expect(c.status).toBe(403);
    const d = await manager.patch(`/api/sites/${f.siteA}`).set('origin', 'null').send({ notes: 'forged' });
    expect(d.status).toBe(403);
  });

  it('refuses a forged sign-in (login CSRF) too', async () => {
    const res = await request(app).post('/api/auth/sign-in').set('origin', 'https://evil.example').send({ email: f.users.owner.email, password: PASSWORD });
    expect(res.status).toBe(403);
  });

  it('lets through the server’s own origin, PUBLIC_URL, same-origin fetches, plain clients and reads', async () => {
    const host = 'runnel.local:3000';
    expect((await manager.patch(`/api/sites/${f.siteA}`).set({ host, origin: `http://${host}` }).send({ notes: 'one' })).status).toBe(200);
    expect((await manager.patch(`/api/sites/${f.siteA}`).set('origin', 'https://runnel.example.test').send({ notes: 'two' })).status).toBe(200);
    expect((await manager.patch(`/api/sites/${f.siteA}`).set({ host, referer: `http://${host}/sites/1` }).send({ notes: 'three' })).status).toBe(200);
    expect((await manager.patch(`/api/sites/${f.siteA}`).set('sec-fetch-site', 'same-origin').send({ notes: 'four' })).status).toBe(200);
    expect((await manager.patch(`/api/sites/${f.siteA}`).send({ notes: 'five' })).status).toBe(200);
    expect((await manager.get(`/api/sites/${f.siteA}`).set('origin', 'https://evil.example')).status).toBe(200);
    expect(await notes()).toBe('five');
  });

  it('does not apply to API tokens, which no other site can attach', async () => {
    const admin = await signedIn(app, f.users.admin.email);
    const { token } = (await admin.post('/api/tokens').send({ name: 'CI', role: 'manager' })).body;
    const res = await request(app).patch(`/api/sites/${f.siteA}`).set({ authorization: `Bearer ${token}`, origin: 'https://evil.example' }).send({ notes: 'by token' });
    expect(res.status).toBe(200);
  });
});

describe('behind a TLS proxy (TRUST_PROXY=1)', () => {
  it('marks the session cookie Secure and accepts the public origin from X-Forwarded-*', async () => {
    const proxied = buildTestApp(tdb, { TRUST_PROXY: '1' }).app;
    const res = await request(proxied)
      .post('/api/auth/sign-in')
      .set({ 'x-forwarded-proto': 'https', 'x-forwarded-host': 'irrigation.example.org', origin: 'https://irrigation.example.org' })
      .send({ email: f.users.owner.email, password: PASSWORD });
    expect(res.status).toBe(200);
    const cookie = ([] as string[]).concat(res.headers['set-cookie'] ?? []).find((c) => c.startsWith('runnel.sid='))!;
    expect(cookie).toMatch(/;\s*Secure/i);
    expect(res.headers['strict-transport-security']).toBeTruthy();
  });
});

describe('secrets stay out of logs and error bodies', () => {
  it('logs no password, token, cookie or session id, and errors never echo them', async () => {
    const lines: string[] = [];
    const sink = new Writable({ write: (chunk, _enc, done) => { lines.push(String(chunk)); done(); } });
    const config = testConfig(tdb.url, { LOG_LEVEL: 'trace' });
    const { app: logged } = createApp({ config, db: tdb.db, pool: tdb.pool, log: pino({ level: 'trace' }, sink), sessionCookieName: 'runnel.sid', clientDir: '/nonexistent' });
    const secretPw = 'Secret-Password-' + 'z'.repeat(200);
    const bad = await request(logged).post('/api/auth/sign-in').send({ email: f.users.owner.email, password: secretPw });
    expect(bad.status).toBe(400);
    expect(JSON.stringify(bad.body)).not.toContain('Secret-Password');
    const wrong = await request(logged).post('/api/auth/sign-in').send({ email: f.users.owner.email, password: 'Wrong-Password-123' });
    expect(JSON.stringify(wrong.body)).not.toContain('Wrong-Password-123');
    const ok = await request(logged).post('/api/auth/sign-in').send({ email: f.users.owner.email, password: PASSWORD });
    const sid = ([] as string[]).concat(ok.headers['set-cookie'])[0].split(';')[0];
    await request(logged).get('/api/auth/me').set('cookie', sid).set('referer', 'http://x/accept-invite?token=LinkToken123456789012345');
    await request(logged).get('/api/sites').set('authorization', 'Bearer rnt_' + 'Q'.repeat(43));
    await request(logged).post('/api/auth/accept-invite').send({ token: 'InviteToken-abcdefghijklmnop', password: 'Invite-Password-xyz' });
    const all = lines.join('\n');
    expect(lines.length).toBeGreaterThan(3);
    for (const s of ['Secret-Password', 'Wrong-Password-123', PASSWORD, sid.split('=')[1], 'LinkToken123456789012345', 'Q'.repeat(43), 'InviteToken-abcdefghijklmnop', 'Invite-Password-xyz']) {
      expect(all, s).not.toContain(s);
    }
  });
});
