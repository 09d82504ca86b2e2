import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Express } from 'express';
import { sql } from 'drizzle-orm';
import { zones } from '../../server/db/schema/index';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;
let admin: Awaited<ReturnType<typeof signedIn>>;

/** A fingerprint of every row of the tables a write route may touch. */
async function snapshot(): Promise<string> {
  const r = await tdb.db.execute(sql`
    select json_build_object(
      'sites', (select json_agg(s order by id) from sites s),
      'controllers', (select json_agg(c order by id) from controllers c),
      'zones', (select json_agg(z order by id) from zones z),
      'audit', (select count(*) from audit_log)
    ) as v`);
  return JSON.stringify(r.rows[0].v);
}

const site = () => ({
  name: 'Bad input site', timezone: 'America/Denver', latitude: 39.7, longitude: -105, supplyFlowLpm: 60, staticPressureKPa: 400,
});
const controller = () => ({ siteId: f.siteA, serial: 'BAD-0001', name: 'Board', relayCount: 6 });
const zone = () => ({
  controllerId: f.controllerA, relay: 3, name: 'Zone', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip',
  headCount: 20, flowPerHeadLpm: 0.1, areaM2: 12, rootDepthM: 0.4,
});

type BadCase = {
  what: string;
  method: 'post' | 'patch' | 'delete';
  path: () => string;
  body?: () => unknown;
  status: 400 | 409;
  code: string;
  /** A detail must name this field … */
  field?: string;
  /** … and, when given, read like this. */
  detail?: Record<string, unknown>;
  raw?: string;
};

/** A second zone on controller A (relay 2) and one on its last relay (6), made in beforeAll. */
const extra = { relay2: 0 };

const cases: BadCase[] = [
  // sites
  { what: 'a site without a name', method: 'post', path: () => '/api/sites', body: () => ({ ...site(), name: undefined }), status: 400, code: 'validation_failed', field: 'name' },
  { what: 'a site with an unknown field', method: 'post', path: () => '/api/sites', body: () => ({ ...site(), colour: 'red' }), status: 400, code: 'validation_failed', field: 'colour', detail: { message: 'Unknown field' } },
  { what: 'a site with a made-up timezone', method: 'post', path: () => '/api/sites', body: () => ({ ...site(), timezone: 'Mars/Olympus' }), status: 400, code: 'validation_failed', field: 'timezone' },
  { what: 'a site with latitude beyond 90°', method: 'post', path: () => '/api/sites', body: () => ({ ...site(), latitude: 91 }), status: 400, code: 'validation_failed', field: 'latitude' },
  { what: 'a site with a supply given as text', method: 'post', path: () => '/api/sites', body: () => ({ ...site(), supplyFlowLpm: '60' }), status: 400, code: 'validation_failed', field: 'supplyFlowLpm' },
  { what: 'a site with zero supply flow', method: 'post', path: () => '/api/sites', body: () => ({ ...site(), supplyFlowLpm: 0 }), status: 400, code: 'validation_failed', field: 'supplyFlowLpm' },
  { what: 'a site whose restriction rule lists no weekday', method: 'post', path: () => '/api/sites', body: () => ({ ...site(), restrictions: { dayRule: 'weekdays', weekdays: [], noWateringWindows: [] } }), status: 400, code: 'validation_failed', field: 'restrictions.weekdays' },
  { what: 'a site update with a margin of 95 %', method: 'patch', path: () => `/api/sites/${f.siteA}`, body: () => ({ supplyMarginPct: 95 }), status: 400, code: 'validation_failed', field: 'supplyMarginPct' },
  { what: 'an empty site update', method: 'patch', path: () => `/api/sites/${f.siteA}`, body: () => ({}), status: 400, code: 'validation_failed' },
  { what: 'a site update with an unknown field', method: 'patch', path: () => `/api/sites/${f.siteA}`, body: () => ({ notes: 'fine', colour: 'red', owner: { name: 'x' } }), status: 400, code: 'validation_failed', field: 'owner', detail: { message: 'Unknown field', code: 'unrecognized_keys' } },
  { what: 'a site restriction with an unknown field inside it', method: 'patch', path: () => `/api/sites/${f.siteA}`, body: () => ({ restrictions: { dayRule: 'any', weekdays: [], noWateringWindows: [], hose: true } }), status: 400, code: 'validation_failed', field: 'restrictions.hose', detail: { message: 'Unknown field' } },
  { what: 'deleting a site that still has controllers', method: 'delete', path: () => `/api/sites/${f.siteA}`, status: 409, code: 'site_has_controllers' },
  { what: 'a body that is not JSON', method: 'post', path: () => '/api/sites', body: () => null, raw: '{"name": ', status: 400, code: 'bad_json' },
  { what: 'a body over the size limit', method: 'post', path: () => '/api/sites', body: () => ({ ...site(), notes: 'x'.repeat(200_000) }), status: 400, code: 'body_too_large', field: '', detail: { limitBytes: 100 * 1024, message: 'A request body may be at most 100 kB' } },
  // controllers
  { what: 'a controller with 3 relays', method: 'post', path: () => '/api/controllers', body: () => ({ ...controller(), relayCount: 3 }), status: 400, code: 'validation_failed', field: 'relayCount' },
  { what: 'a controller with 9 relays', method: 'post', path: () => '/api/controllers', body: () => ({ ...controller(), relayCount: 9 }), status: 400, code: 'validation_failed', field: 'relayCount' },
  { what: 'a controller with a lower-case serial', method: 'post', path: () => '/api/controllers', body: () => ({ ...controller(), serial: 'bad serial' }), status: 400, code: 'validation_failed', field: 'serial' },
  { what: 'a controller whose serial is taken', method: 'post', path: () => '/api/controllers', body: () => ({ ...controller(), serial: 'TEST-A-0001' }), status: 409, code: 'serial_taken' },
  { what: 'a controller on a site that does not exist', method: 'post', path: () => '/api/controllers', body: () => ({ ...controller(), siteId: 999999 }), status: 400, code: 'validation_failed', field: 'siteId' },
  { what: 'a controller whose master valve relay is not on the board', method: 'post', path: () => '/api/controllers', body: () => ({ ...controller(), masterValveRelay: 7 }), status: 400, code: 'validation_failed', field: 'masterValveRelay' },
  { what: 'a controller update with a stagger of 10 ms', method: 'patch', path: () => `/api/controllers/${f.controllerA}`, body: () => ({ staggerMs: 10 }), status: 400, code: 'validation_failed', field: 'staggerMs' },
  { what: 'a controller update that changes the serial', method: 'patch', path: () => `/api/controllers/${f.controllerA}`, body: () => ({ serial: 'NEW-0001' }), status: 400, code: 'validation_failed', field: 'serial', detail: { message: 'Unknown field' } },
  { what: 'a controller update with an unknown field', method: 'patch', path: () => `/api/controllers/${f.controllerA}`, body: () => ({ name: 'Renamed', wifiPassword: 'x', colour: 'red' }), status: 400, code: 'validation_failed', field: 'wifiPassword', detail: { message: 'Unknown field' } },
  { what: 'a controller update that leaves a wired zone above the relay count', method: 'patch', path: () => `/api/controllers/${f.controllerA}`, body: () => ({ relayCount: 4 }), status: 409, code: 'relay_in_use', field: 'relayCount' },
  { what: 'a controller update that makes the master valve the relay of a zone', method: 'patch', path: () => `/api/controllers/${f.controllerA}`, body: () => ({ masterValveRelay: 1 }), status: 409, code: 'relay_taken' },
  // zones
  { what: 'a zone whose relay is above the controller’s relay count', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), relay: 7 }), status: 400, code: 'validation_failed', field: 'relay' },
  { what: 'a zone whose relay is already taken', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), relay: 1 }), status: 409, code: 'relay_taken', field: 'relay' },
  { what: 'a zone with relay 0', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), relay: 0 }), status: 400, code: 'validation_failed', field: 'relay' },
  { what: 'a zone with no heads', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), headCount: 0 }), status: 400, code: 'validation_failed', field: 'headCount' },
  { what: 'a zone with negative flow per head', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), flowPerHeadLpm: -1 }), status: 400, code: 'validation_failed', field: 'flowPerHeadLpm' },
  { what: 'a zone with an unknown plant type', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), plantType: 'cactus' }), status: 400, code: 'validation_failed', field: 'plantType' },
  { what: 'a zone with a fractional head count', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), headCount: 2.5 }), status: 400, code: 'validation_failed', field: 'headCount' },
  { what: 'a zone with efficiency above 1', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), efficiency: 1.2 }), status: 400, code: 'validation_failed', field: 'efficiency' },
  { what: 'a zone on a controller that does not exist', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), controllerId: 999999 }), status: 400, code: 'validation_failed', field: 'controllerId' },
  { what: 'a zone without a name and an unknown field', method: 'post', path: () => '/api/zones', body: () => ({ ...zone(), name: '', valve: 'x' }), status: 400, code: 'validation_failed', field: 'valve', detail: { message: 'Unknown field' } },
  { what: 'a zone update with zero area', method: 'patch', path: () => `/api/zones/${f.zoneA}`, body: () => ({ areaM2: 0 }), status: 400, code: 'validation_failed', field: 'areaM2' },
  { what: 'a zone update to a relay above the board’s count', method: 'patch', path: () => `/api/zones/${f.zoneA}`, body: () => ({ relay: 8 }), status: 400, code: 'validation_failed', field: 'relay' },
  { what: 'a zone update to a relay already taken by another zone', method: 'patch', path: () => `/api/zones/${f.zoneA}`, body: () => ({ relay: 2 }), status: 409, code: 'relay_taken', field: 'relay', detail: { message: 'Relay already taken' } },
  { what: 'a zone update to the relay of the board’s last zone', method: 'patch', path: () => `/api/zones/${extra.relay2}`, body: () => ({ relay: 6, name: 'Moved' }), status: 409, code: 'relay_taken', field: 'relay' },
  { what: 'a zone update with an unknown field', method: 'patch', path: () => `/api/zones/${f.zoneA}`, body: () => ({ headCount: 7, nozzle: 'red' }), status: 400, code: 'validation_failed', field: 'nozzle', detail: { message: 'Unknown field' } },
  // auth
  { what: 'a sign-in without a password', method: 'post', path: () => '/api/auth/sign-in', body: () => ({ email: 'admin@fixture.test' }), status: 400, code: 'validation_failed', field: 'password' },
  { what: 'a preferences update with an unknown unit system', method: 'patch', path: () => '/api/auth/me', body: () => ({ unitSystem: 'imperialish' }), status: 400, code: 'validation_failed', field: 'unitSystem' },
];

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  admin = await signedIn(app, f.users.admin.email);
  const made = await tdb.db
    .insert(zones)
    .values([2, 6].map((relay) => ({
      controllerId: f.controllerA, relay, name: `Zone A${relay}`, plantType: 'shrubs' as const, soilTexture: 'loam' as const,
      headType: 'drip' as const, headCount: 10, flowPerHeadLpm: 0.1, areaM2: 10, rootDepthM: 0.4, efficiency: 0.9,
    })))
    .returning({ id: zones.id, relay: zones.relay });
  extra.relay2 = made.find((z) => z.relay === 2)!.id;
});
afterAll(async () => {
  await tdb.drop();
});

describe('bad input gets a clear error and changes nothing', () => {
  for (const c of cases) {
    it(`refuses ${c.what} with ${c.status} ${c.code}`, async () => {
      const before = await snapshot();
      let req = admin[c.method](c.path());
      if (c.raw !== undefined) req = req.set('content-type', 'application/json').send(c.raw);
      else if (c.body) req = req.send(c.body() as object);
      const res = await req;
      expect(res.status).toBe(c.status);
      // the one error shape, `details` always present
      expect(Object.keys(res.body)).toEqual(['error']);
      expect(Object.keys(res.body.error).sort()).toEqual(['code', 'details', 'message']);
      expect(res.body.error.code).toBe(c.code);
      expect(res.body.error.message).toEqual(expect.any(String));
      if (c.field !== undefined) {
        expect(res.body.error.details).toEqual(
          expect.arrayContaining([expect.objectContaining({ path: c.field, message: expect.any(String), ...c.detail })]),
        );
      }
      // every detail names a field in the one format: a path and a message
      if (Array.isArray(res.body.error.details)) {
        for (const d of res.body.error.details) expect(d).toMatchObject({ path: expect.any(String), message: expect.any(String) });
      } else {
        expect(res.body.error.details).toBeNull();
      }
      expect(await snapshot()).toBe(before);
    });
  }

  it('saves a zone whose flow is above the usable supply but flags it with a warning', async () => {
    // fixture sites: 60 L/min supply, 20 % margin → 48 L/min usable
    const res = await admin.post('/api/zones').send({ ...zone(), relay: 5, headType: 'spray', headCount: 10, flowPerHeadLpm: 6 });
    expect(res.status).toBe(201);
    expect(res.body.flowLpm).toBe(60);
    expect(res.body.warnings.map((w: { code: string }) => w.code)).toEqual(['over_supply']);
    const site = await admin.get(`/api/sites/${f.siteA}`);
    expect(site.body.warnings.some((w: { code: string }) => w.code === 'over_supply')).toBe(true);
  });
});
