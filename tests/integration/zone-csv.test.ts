import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Express } from 'express';
import { eq, inArray, sql } from 'drizzle-orm';
import { controllers, zones } from '../../server/db/schema/index';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;
let manager: Awaited<ReturnType<typeof signedIn>>;
let serialA: string;

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  manager = await signedIn(app, f.users.manager.email);
  serialA = (await tdb.db.select().from(controllers).where(eq(controllers.id, f.controllerA)))[0].serial;
});
afterAll(async () => {
  await tdb.drop();
});

const HEADER = 'controller_serial,relay,name,plant_type,soil_texture,head_type,other_head_type,head_count,flow_per_head_lpm,area_m2,root_depth_m,efficiency,moisture_threshold_pct,notes';
/** A file without the optional other_head_type column (as exported before it existed) still imports. */
const SHORT_HEADER = HEADER.replace(',other_head_type', '');
const zoneCount = async () => (await tdb.db.execute(sql`select count(*)::int as n from zones`)).rows[0].n as number;
const upload = (csv: string, dryRun: boolean) =>
  manager.post(`/api/sites/${f.siteA}/zones/import${dryRun ? '?dryRun=1' : ''}`).attach('file', Buffer.from(csv), 'zones.csv');

describe('zones as CSV', () => {
  it('offers a template with the export’s columns', async () => {
    const t = await manager.get('/api/zones/template.csv');
    expect(t.status).toBe(200);
    expect(t.headers['content-type']).toMatch(/text\/csv/);
    expect(t.text.split('\n').find((l) => !l.startsWith('#'))).toBe(HEADER);
    const e = await manager.get(`/api/sites/${f.siteA}/zones.csv`);
    expect(e.status).toBe(200);
    expect(e.headers['content-disposition']).toMatch(/attachment; filename="?runnel-zones-test-site-a\.csv/);
    const lines = e.text.trim().split('\n');
    expect(lines[0]).toBe(HEADER);
    expect(lines[1]).toBe(`${serialA},1,Zone A1,cool_season_turf,loam,spray,,6,5,100,0.15,0.7,,`);
  });

  it('saves nothing when one row is bad, and reports that row', async () => {
    const before = await zoneCount();
    const csv = [
      '# a comment line',
      SHORT_HEADER,
      `${serialA},2,Front beds,shrubs,sandy_loam,drip,40,0.5,60,0.4,0.9,,drip line`,
      `${serialA},3,Back lawn,cool_season_turf,clay,rotor,lots,12,300,0.2,,,`,
      `${serialA},4,Side strip,groundcover,loam,spray,6,4,20,0.1,,30,`,
    ].join('\n');
    const preview = await upload(csv, true);
    expect(preview.status, JSON.stringify(preview.body)).toBe(200);
    expect(preview.body).toMatchObject({ dryRun: true, saved: 0, rowCount: 3, validCount: 2, errorCount: 1 });
    expect(preview.body.errors).toEqual([{ line: 4, field: 'head_count', message: '“lots” is not a number' }]);
    expect(preview.body.rows.map((r: { line: number }) => r.line)).toEqual([3, 5]);
    const save = await upload(csv, false);
    expect(save.status).toBe(400);
    expect(save.body.error).toMatchObject({ code: 'csv_rows_invalid', message: '1 row has errors; nothing was saved' });
    expect(save.body.error.details[0]).toMatchObject({ line: 4, field: 'head_count' });
    expect(await zoneCount()).toBe(before);
  });

  it('checks the board: controller at this site, relay on the board, free, not twice in the file', async () => {
    const csv = [
      SHORT_HEADER,
      `NOPE-0001,2,Ghost,shrubs,loam,drip,10,0.5,10,0.4,,,`,
      `TEST-B-0001,2,Other site,shrubs,loam,drip,10,0.5,10,0.4,,,`,
      `${serialA},7,Too high,shrubs,loam,drip,10,0.5,10,0.4,,,`,
      `${serialA},1,Taken,shrubs,loam,drip,10,0.5,10,0.4,,,`,
      `${serialA},5,First,shrubs,loam,drip,10,0.5,10,0.4,,,`,
      `${serialA},5,Second,shrubs,loam,drip,10,0.5,10,0.4,,,`,
      `${serialA},6,Wet,cactus,loam,drip,10,0.5,10,1.5,2,,`,
    ].join('\n');
    const r = await upload(csv, true);
    const by = (line: number) => r.body.errors.filter((e: { line: number }) => e.line === line);
    expect(by(2)[0]).toMatchObject({ field: 'controller_serial', message: 'No controller NOPE-0001 at this site' });
    expect(by(3)[0]).toMatchObject({ field: 'controller_serial' });
    expect(by(4)[0]).toMatchObject({ field: 'relay', message: `${serialA} has 6 relays` });
    expect(by(5)[0]).toMatchObject({ field: 'relay', message: `Relay 1 of ${serialA} is already wired to Zone A1` });
    expect(by(6)).toEqual([]);
    expect(by(7)[0]).toMatchObject({ field: 'relay', message: `Relay 5 of ${serialA} is also on line 6` });
    expect(by(8).map((e: { field: string }) => e.field).sort()).toEqual(['efficiency', 'plant_type']);
  });

  it('saves every row in one go when all are valid, and audits the import', async () => {
    const before = await zoneCount();
    const csv = [SHORT_HEADER, `${serialA},2,Front beds,shrubs,sandy_loam,drip,40,0.5,60,0.4,0.9,,drip line`, `${serialA},3,Back lawn,cool_season_turf,clay,rotor,4,12,300,0.2,,,`].join('\n');
    const r = await upload(csv, false);
    expect(r.status, JSON.stringify(r.body)).toBe(200);
    expect(r.body).toMatchObject({ dryRun: false, saved: 2, errorCount: 0 });
    expect(await zoneCount()).toBe(before + 2);
    const exported = (await manager.get(`/api/sites/${f.siteA}/zones.csv`)).text;
    expect(exported).toContain(`${serialA},2,Front beds,shrubs,sandy_loam,drip,,40,0.5,60,0.4,0.9,,drip line`);
    const audit = await manager.get(`/api/audit?action=zone.import&siteId=${f.siteA}`);
    expect(audit.body.items[0].after).toMatchObject({ rows: 2, file: 'zones.csv' });
  });

  it('keeps another head type through export and import, and an empty cell as none', async () => {
    const csv = [HEADER, `${serialA},4,Survey rotors,cool_season_turf,loam,rotor,spray,5,12,200,0.2,,,`, `${serialA},5,Plain rotors,cool_season_turf,loam,rotor,,5,12,200,0.2,,,`].join('\n');
    const r = await upload(csv, false);
    expect(r.status, JSON.stringify(r.body)).toBe(200);
    expect(r.body.rows.map((z: { otherHeadType: string | null }) => z.otherHeadType)).toEqual(['spray', null]);
    let ids: number[] = r.body.zoneIds;
    const stored = async () => (await tdb.db.select().from(zones).where(inArray(zones.id, ids))).sort((a, b) => a.relay - b.relay).map((z) => [z.relay, z.otherHeadType]);
    expect(await stored()).toEqual([[4, 'spray'], [5, null]]);

    // The exported lines, imported again once those zones are gone, give back the same zones.
    const exported = (await manager.get(`/api/sites/${f.siteA}/zones.csv`)).text.trim().split('\n');
    const mine = exported.filter((l) => /,(Survey|Plain) rotors,/.test(l));
    expect(mine).toEqual([`${serialA},4,Survey rotors,cool_season_turf,loam,rotor,spray,5,12,200,0.2,0.75,,`, `${serialA},5,Plain rotors,cool_season_turf,loam,rotor,,5,12,200,0.2,0.75,,`]);
    await tdb.db.delete(zones).where(inArray(zones.id, ids));
    const again = await upload([exported[0], ...mine].join('\n'), false);
    expect(again.status, JSON.stringify(again.body)).toBe(200);
    ids = again.body.zoneIds;
    expect(await stored()).toEqual([[4, 'spray'], [5, null]]);
    await tdb.db.delete(zones).where(inArray(zones.id, ids));
  });

  it('refuses an unknown other head type, or one equal to the head type, naming the row, and saves nothing', async () => {
    const before = await tdb.db.select().from(zones).orderBy(zones.id);
    const csv = [
      HEADER,
      `${serialA},4,Good row,shrubs,loam,drip,bubbler,10,0.5,10,0.4,,,`,
      `${serialA},5,Misty,cool_season_turf,loam,rotor,mist,5,12,200,0.2,,,`,
      `${serialA},6,Twice,cool_season_turf,loam,rotor,rotor,5,12,200,0.2,,,`,
    ].join('\n');
    const preview = await upload(csv, true);
    expect(preview.status, JSON.stringify(preview.body)).toBe(200);
    expect(preview.body).toMatchObject({ validCount: 1, errorCount: 2 });
    expect(preview.body.errors).toEqual([
      { line: 3, field: 'other_head_type', message: expect.stringMatching(/spray.*rotor.*drip.*bubbler/) },
      { line: 4, field: 'other_head_type', message: 'The other head type must differ from the head type' },
    ]);
    const save = await upload(csv, false);
    expect(save.status).toBe(400);
    expect(save.body.error).toMatchObject({ code: 'csv_rows_invalid', message: '2 rows have errors; nothing was saved' });
    expect(save.body.error.details.map((d: { line: number; field: string }) => [d.line, d.field])).toEqual([[3, 'other_head_type'], [4, 'other_head_type']]);
    expect(await tdb.db.select().from(zones).orderBy(zones.id)).toEqual(before);
  });

  it('explains a file that is not a zones CSV', async () => {
    const wrong = await upload('date,tmax_c\n2025-01-01,3\n', true);
    expect(wrong.status).toBe(400);
    expect(wrong.body.error.code).toBe('csv_missing_columns');
    const binary = await manager.post(`/api/sites/${f.siteA}/zones/import`).attach('file', Buffer.from([0, 1, 2, 255, 254]), 'zones.csv');
    expect(binary.body.error.code).toBe('not_csv');
  });

  it('lets only admins and managers import', async () => {
    const tech = await signedIn(app, f.users.technician.email);
    expect((await tech.post(`/api/sites/${f.siteA}/zones/import?dryRun=1`).attach('file', Buffer.from(HEADER), 'z.csv')).status).toBe(403);
    expect((await tech.get(`/api/sites/${f.siteA}/zones.csv`)).status).toBe(200);
    expect((await tech.get(`/api/sites/${f.siteB}/zones.csv`)).status).toBe(404);
  });
});
