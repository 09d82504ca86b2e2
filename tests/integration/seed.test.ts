import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import pg from 'pg';
import { sql } from 'drizzle-orm';
import { createDb } from '../../server/db/client';
import { runMigrations } from '../../server/db/migrate';
import { DEMO_PASSWORD, demoSites, seedDemo } from '../../server/db/seed-demo';
import { adminUrl } from '../helpers/global-setup';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';

let tdb: TestDb;
beforeAll(async () => {
  tdb = await createTestDb();
});
afterAll(async () => {
  await tdb.drop();
});

describe('migrations and demo data', () => {
  it('apply to an empty database', async () => {
    const name = `runnel_t_empty_${Date.now().toString(36)}`;
    const admin = new pg.Client({ connectionString: `${adminUrl()}/postgres` });
    await admin.connect();
    await admin.query(`create database "${name}"`);
    const dbh = createDb(`${adminUrl()}/${name}`, { max: 1 });
    try {
      await runMigrations(dbh.db);
      const r = await dbh.db.execute(sql`select table_name from information_schema.tables where table_schema = 'public'`);
      const tables = r.rows.map((x) => x.table_name);
      for (const t of ['users', 'sessions', 'sites', 'site_members', 'controllers', 'zones', 'audit_log']) expect(tables).toContain(t);
      await runMigrations(dbh.db); // a second run is a no-op
    } finally {
      await dbh.close();
      await admin.query(`drop database "${name}" with (force)`);
      await admin.end();
    }
  });

  it('loads the demo scenario once, with sites in two timezones and one user per role', async () => {
    const first = await seedDemo(tdb.db);
    expect(first).not.toBeNull();
    expect(await seedDemo(tdb.db)).toBeNull();
    const count = async (t: string) => (await tdb.db.execute(sql.raw(`select count(*)::int as n from ${t}`))).rows[0].n as number;
    expect(await count('sites')).toBeGreaterThanOrEqual(4);
    expect(await count('controllers')).toBeGreaterThanOrEqual(6);
    expect(await count('zones')).toBeGreaterThanOrEqual(24);
    const tz = await tdb.db.execute(sql`select count(distinct timezone)::int as n from sites`);
    expect(tz.rows[0].n).toBeGreaterThanOrEqual(2);
    const roles = await tdb.db.execute(sql`select role, count(*)::int as n from users group by role order by role`);
    expect(roles.rows.map((r) => r.role).sort()).toEqual(['admin', 'manager', 'owner', 'technician']);
    const relays = await tdb.db.execute(sql`select count(*)::int as n from controllers where relay_count not between 4 and 8`);
    expect(relays.rows[0].n).toBe(0);
  });

  it('lets the demo owner see only their own site', async () => {
    const { app } = buildTestApp(tdb);
    const owner = await signedIn(app, 'owner@runnel.test', DEMO_PASSWORD);
    const res = await owner.get('/api/sites');
    expect(res.body.items.map((s: { name: string }) => s.name)).toEqual([demoSites.find((s) => s.key === 'heron')!.name]);
  });

  it('has a site where zones may run in parallel within the supply', async () => {
    const { app } = buildTestApp(tdb);
    const mgr = await signedIn(app, 'manager@runnel.test', DEMO_PASSWORD);
    const list = (await mgr.get('/api/sites')).body.items as { id: number }[];
    let found = false;
    for (const s of list) {
      const site = (await mgr.get(`/api/sites/${s.id}`)).body;
      for (const c of site.controllers.filter((x: { maxConcurrentValves: number }) => x.maxConcurrentValves >= 2)) {
        const flows = site.zones.filter((z: { controllerId: number }) => z.controllerId === c.id).map((z: { flowLpm: number }) => z.flowLpm).sort((a: number, b: number) => a - b);
        if (flows.length >= 2 && flows[0] + flows[1] <= site.usableSupplyLpm) found = true;
      }
    }
    expect(found).toBe(true);
  });

  it('refuses to load demo data in production', async () => {
    await expect(seedDemo(tdb.db, { production: true })).rejects.toThrow(/never/);
  });
});
