import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { eq } from 'drizzle-orm';
import { apiTokens } from '../../server/db/schema/index';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;
let admin: Awaited<ReturnType<typeof signedIn>>;

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  admin = await signedIn(app, f.users.admin.email);
});
afterAll(async () => {
  await tdb.drop();
});

const bearer = (token: string) => ({ authorization: `Bearer ${token}` });

async function makeToken(body: object) {
  const res = await admin.post('/api/tokens').send(body);
  expect(res.status, JSON.stringify(res.body)).toBe(201);
  return res.body as { token: string; item: { id: number; prefix: string; lastUsedAt: string | null } };
}

describe('API tokens', () => {
  it('shows the token once and stores only its hash, with a prefix for display', async () => {
    const { token, item } = await makeToken({ name: 'Home hub', role: 'owner', siteIds: [f.siteA] });
    expect(token).toMatch(/^rnt_[A-Za-z0-9_-]{43}$/);
    expect(item).toMatchObject({ name: 'Home hub', role: 'owner', siteIds: [f.siteA], lastUsedAt: null, revokedAt: null });
    expect(token.startsWith(item.prefix)).toBe(true);
    const [row] = await tdb.db.select().from(apiTokens).where(eq(apiTokens.id, item.id));
    expect(row.tokenHash).toMatch(/^[0-9a-f]{64}$/);
    expect(JSON.stringify(row)).not.toContain(token);
    const list = await admin.get('/api/tokens');
    expect(JSON.stringify(list.body)).not.toContain(token);
    expect(list.body.items[0]).toMatchObject({ id: item.id, prefix: item.prefix });
  });

  it('limits a token to its sites: another site does not exist for it', async () => {
    const { token, item } = await makeToken({ name: 'Site A script', role: 'technician', siteIds: [f.siteA] });
    const sites = await request(app).get('/api/sites').set(bearer(token));
    expect(sites.status).toBe(200);
    expect(sites.body.items.map((s: { id: number }) => s.id)).toEqual([f.siteA]);
    expect((await request(app).get(`/api/sites/${f.siteA}`).set(bearer(token))).status).toBe(200);
    expect((await request(app).get(`/api/sites/${f.siteB}`).set(bearer(token))).status).toBe(404);
    expect((await request(app).get(`/api/zones/${f.zoneB}`).set(bearer(token))).status).toBe(404);
    expect((await request(app).get(`/api/controllers/${f.controllerB}`).set(bearer(token))).status).toBe(404);
    // it acts with its role: a technician may not add a zone
    expect((await request(app).post('/api/zones').set(bearer(token)).send({})).status).toBe(403);
    const listed = (await admin.get('/api/tokens')).body.items.find((t: { id: number }) => t.id === item.id);
    expect(listed.lastUsedAt).toBeTruthy();
  });

  it('writes with a token are audited under the token’s name and the caller’s address', async () => {
    const { token, item } = await makeToken({ name: 'Logger', role: 'technician', siteIds: [f.siteA] });
    const res = await request(app).post(`/api/sites/${f.siteA}/supply-tests`).set(bearer(token)).send({ kind: 'bucket', volumeL: 10, seconds: 12 });
    expect(res.status).toBe(201);
    const audit = await admin.get('/api/audit?action=supply_test.create');
    expect(audit.body.items[0].actor).toEqual({ userId: null, label: `token:${item.prefix}` });
    expect(audit.body.items[0].ip).toBeTruthy();
    const created = await admin.get('/api/audit?action=api_token.create');
    expect(JSON.stringify(created.body)).not.toContain(token);
  });

  it('stops working once revoked', async () => {
    const { token, item } = await makeToken({ name: 'Short-lived', role: 'manager' });
    expect((await request(app).get('/api/sites').set(bearer(token))).status).toBe(200);
    expect((await admin.delete(`/api/tokens/${item.id}`)).status).toBe(204);
    const after = await request(app).get('/api/sites').set(bearer(token));
    expect(after.status).toBe(401);
    expect(after.body.error.code).toBe('bad_token');
    expect((await admin.get('/api/tokens')).body.items.find((t: { id: number }) => t.id === item.id).revokedAt).toBeTruthy();
  });

  it('refuses made-up tokens, malformed headers and personal routes', async () => {
    expect((await request(app).get('/api/sites').set(bearer('rnt_' + 'A'.repeat(43)))).status).toBe(401);
    expect((await request(app).get('/api/sites').set({ authorization: 'Basic abc' })).status).toBe(401);
    const { token } = await makeToken({ name: 'No profile', role: 'admin' });
    const me = await request(app).get('/api/auth/me').set(bearer(token));
    expect(me.status).toBe(403);
    expect(me.body.error.code).toBe('token_not_allowed');
  });

  it('needs at least one site for technician and owner tokens, and only admins make tokens', async () => {
    const r = await admin.post('/api/tokens').send({ name: 'Nowhere', role: 'owner', siteIds: [] });
    expect(r.status).toBe(400);
    expect(r.body.error.details[0].path).toBe('siteIds');
    const mgr = await signedIn(app, f.users.manager.email);
    expect((await mgr.post('/api/tokens').send({ name: 'x', role: 'manager' })).status).toBe(403);
    expect((await mgr.get('/api/tokens')).status).toBe(403);
  });
});
