import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';
import { mountedRoutes } from '../helpers/route-coverage';

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

describe('GET /api/openapi.json', () => {
  it('is for signed-in users only', async () => {
    expect((await request(app).get('/api/openapi.json')).status).toBe(401);
    const owner = await signedIn(app, f.users.owner.email);
    const res = await owner.get('/api/openapi.json');
    expect(res.status).toBe(200);
    expect(res.body.openapi).toBe('3.1.0');
  });

  it('lists every route the server mounts, and nothing it does not', async () => {
    const doc = (await (await signedIn(app, f.users.admin.email)).get('/api/openapi.json')).body;
    const documented = Object.entries(doc.paths as Record<string, Record<string, unknown>>)
      .flatMap(([p, ops]) => Object.keys(ops).map((m) => `${m.toUpperCase()} ${p.replace(/\{(\w+)\}/g, ':$1')}`))
      .sort();
    const mounted = mountedRoutes(app);
    expect(mounted.filter((r) => !documented.includes(r)), 'mounted but not in server/services/openapi.ts').toEqual([]);
    expect(documented.filter((r) => !mounted.includes(r)), 'documented but not mounted').toEqual([]);
  });

  it('describes request bodies with the zod schemas the routes validate with', async () => {
    const doc = (await (await signedIn(app, f.users.admin.email)).get('/api/openapi.json')).body;
    const invite = doc.paths['/api/users/invitations'].post;
    const schema = invite.requestBody.content['application/json'].schema;
    expect(schema.required).toEqual(expect.arrayContaining(['email', 'name', 'role']));
    expect(schema.properties.role.enum).toEqual(['admin', 'manager', 'technician', 'owner']);
    expect(schema.additionalProperties).toBe(false);
    const zone = doc.paths['/api/zones'].post.requestBody.content['application/json'].schema;
    expect(zone.properties.relay).toMatchObject({ type: 'integer', minimum: 1, maximum: 8 });
    const plan = doc.paths['/api/sites/{id}/plan'].post.requestBody.content['multipart/form-data'].schema;
    expect(plan.properties.file).toMatchObject({ type: 'string', format: 'binary' });
    const audit = doc.paths['/api/audit'].get.parameters.map((p: { name: string }) => p.name);
    expect(audit).toEqual(expect.arrayContaining(['siteId', 'userId', 'action', 'entityType', 'from', 'to', 'page', 'pageSize']));
    for (const [p, ops] of Object.entries(doc.paths as Record<string, Record<string, { summary: string }>>)) {
      for (const [m, op] of Object.entries(ops)) expect(op.summary, `${m} ${p}`).toBeTruthy();
    }
  });
});
