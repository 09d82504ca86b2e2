import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Express } from 'express';
import { eq, sql } from 'drizzle-orm';
import { auditLog, sites } from '../../server/db/schema/index';
import { bucketTestFlow } from '../../server/domain/hydraulics';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

type Agent = Awaited<ReturnType<typeof signedIn>>;

let tdb: TestDb;
let app: Express;
let f: Fixture;
const as: Record<'admin' | 'manager' | 'technician' | 'owner', Agent> = {} as never;

/** Every row a supply-test write may touch. */
async function snapshot() {
  const r = await tdb.db.execute(sql`
    select json_build_object(
      'tests', (select json_agg(t order by id) from supply_tests t),
      'sites', (select json_agg(s order by id) from sites s),
      'audit', (select count(*) from audit_log)
    ) as v`);
  return JSON.stringify(r.rows[0].v);
}
const siteRow = async (id: number) => (await tdb.db.select().from(sites).where(eq(sites.id, id)))[0];

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  for (const who of ['admin', 'manager', 'technician', 'owner'] as const) as[who] = await signedIn(app, f.users[who].email);
});
afterAll(async () => {
  await tdb.drop();
});

describe('recording a site’s supply', () => {
  it('records a bucket test of 5 L in 10 s as 30 L/min and leaves the site’s supply alone', async () => {
    // Common practice (rule of thumb): a 5 L bucket filled in 10 s means the supply gives 30 L/min.
    const res = await as.technician.post(`/api/sites/${f.siteA}/supply-tests`).send({ kind: 'bucket', volumeL: 5, seconds: 10, note: 'hose bib by the gate' });
    expect(res.status).toBe(201);
    expect(res.body.test).toMatchObject({
      kind: 'bucket', volumeL: 5, seconds: 10, flowLpm: 30, applied: false, note: 'hose bib by the gate',
      recordedBy: { id: f.users.technician.id, name: 'Fixture technician' },
    });
    expect(res.body.test.flowLpm).toBe(bucketTestFlow(5, 10));
    // fixture sites keep a 20 % margin: 30 × 0.8 = 24 L/min usable
    expect(res.body.usableSupplyLpm).toBe(24);
    expect(res.body.site.supplyFlowLpm).toBe(60);
    expect((await siteRow(f.siteA)).supplyFlowLpm).toBe(60);
  });

  it('with apply, sets the site’s supply (and pressure) to the measured values, audited before and after', async () => {
    const res = await as.technician
      .post(`/api/sites/${f.siteA}/supply-tests`)
      .send({ kind: 'bucket', volumeL: 5, seconds: 10, staticPressureKPa: 380, apply: true });
    expect(res.status).toBe(201);
    expect(res.body.test.applied).toBe(true);
    expect(res.body.site).toMatchObject({ supplyFlowLpm: 30, staticPressureKPa: 380, usableSupplyLpm: 24 });
    expect(await siteRow(f.siteA)).toMatchObject({ supplyFlowLpm: 30, staticPressureKPa: 380 });
    const [audit] = await tdb.db.select().from(auditLog).where(eq(auditLog.action, 'site.supply_apply'));
    expect(audit.before).toMatchObject({ supplyFlowLpm: 60, staticPressureKPa: 400 });
    expect(audit.after).toMatchObject({ supplyFlowLpm: 30, staticPressureKPa: 380, supplyTestId: res.body.test.id });
  });

  it('records a meter reading as litres passed per minute', async () => {
    const res = await as.manager.post(`/api/sites/${f.siteB}/supply-tests`).send({ kind: 'meter', meterStartL: 120_400, meterEndL: 120_850, minutes: 10 });
    expect(res.status).toBe(201);
    expect(res.body.test).toMatchObject({ kind: 'meter', flowLpm: 45, volumeL: null, seconds: null });
    expect(res.body.usableSupplyLpm).toBe(36);
  });

  it.each([
    ['a bucket test of 0 seconds', { kind: 'bucket', volumeL: 5, seconds: 0 }, 'seconds'],
    ['a negative volume', { kind: 'bucket', volumeL: -5, seconds: 10 }, 'volumeL'],
    ['a volume given as text', { kind: 'bucket', volumeL: '5', seconds: 10 }, 'volumeL'],
    ['a meter that ran backwards', { kind: 'meter', meterStartL: 500, meterEndL: 400, minutes: 5 }, 'meterEndL'],
    ['a meter reading over 0 minutes', { kind: 'meter', meterStartL: 0, meterEndL: 400, minutes: 0 }, 'minutes'],
    ['an unknown kind of test', { kind: 'guess', flowLpm: 40 }, 'kind'],
    ['a bucket test with meter fields', { kind: 'bucket', volumeL: 5, seconds: 10, minutes: 3 }, 'minutes'],
    ['a pressure of 0 kPa', { kind: 'bucket', volumeL: 5, seconds: 10, staticPressureKPa: 0 }, 'staticPressureKPa'],
  ])('refuses %s with a 400 naming the field and writes nothing', async (_what, body, field) => {
    const before = await snapshot();
    const res = await as.admin.post(`/api/sites/${f.siteA}/supply-tests`).send({ ...body, apply: true });
    expect(res.status).toBe(400);
    expect(res.body.error.code).toBe('validation_failed');
    expect(res.body.error.details.map((d: { path: string }) => d.path)).toContain(field);
    expect(await snapshot()).toBe(before);
  });

  it('lists the history newest first, with who recorded each test and its usable supply', async () => {
    await as.admin.post(`/api/sites/${f.siteB}/supply-tests`).send({ kind: 'bucket', volumeL: 10, seconds: 12 });
    await as.manager.post(`/api/sites/${f.siteB}/supply-tests`).send({ kind: 'bucket', volumeL: 20, seconds: 30, note: 'latest' });
    const res = await as.admin.get(`/api/sites/${f.siteB}/supply-tests`);
    expect(res.status).toBe(200);
    expect(res.body.items.map((t: { flowLpm: number }) => t.flowLpm)).toEqual([40, 50, 45]);
    expect(res.body.items[0]).toMatchObject({ note: 'latest', recordedBy: { name: 'Fixture manager' }, usableSupplyLpm: 32 });
    const ids = res.body.items.map((t: { id: number }) => t.id);
    expect([...ids].sort((a, b) => b - a)).toEqual(ids);
    expect(res.body.site).toMatchObject({ id: f.siteB, supplyFlowLpm: 60, supplyMarginPct: 20, usableSupplyLpm: 48 });
  });
});

describe('who may record a supply test', () => {
  it('refuses an owner with 403 on their own site, and writes nothing', async () => {
    const before = await snapshot();
    const res = await as.owner.post(`/api/sites/${f.siteA}/supply-tests`).send({ kind: 'bucket', volumeL: 5, seconds: 10 });
    expect(res.status).toBe(403);
    expect(await snapshot()).toBe(before);
    expect((await as.owner.get(`/api/sites/${f.siteA}/supply-tests`)).status).toBe(200);
  });

  it('answers 404 to a technician or owner on a site they are not a member of', async () => {
    expect((await as.technician.post(`/api/sites/${f.siteB}/supply-tests`).send({ kind: 'bucket', volumeL: 5, seconds: 10 })).status).toBe(404);
    expect((await as.technician.get(`/api/sites/${f.siteB}/supply-tests`)).status).toBe(404);
    expect((await as.owner.get(`/api/sites/${f.siteB}/supply-tests`)).status).toBe(404);
  });
});
