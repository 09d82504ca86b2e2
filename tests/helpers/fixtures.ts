import type { Db } from '../../server/db/client';
import { controllers, siteMembers, sites, users, zones } from '../../server/db/schema/index';
import { hashPassword } from '../../server/services/auth';

export const PASSWORD = 'correct horse battery';

export type Fixture = {
  users: Record<'admin' | 'manager' | 'technician' | 'owner', { id: number; email: string }>;
  /** siteA: technician and owner are members; siteB: nobody but admins and managers. */
  siteA: number;
  siteB: number;
  controllerA: number;
  controllerB: number;
  zoneA: number;
  zoneB: number;
};

/** A small, explicit world for API tests: two sites, a controller and a zone on each, one user per role. */
export async function seedFixture(db: Db): Promise<Fixture> {
  const hash = await hashPassword(PASSWORD);
  const site = (name: string, tz: string) => ({
    name, address: `${name} road`, timezone: tz, latitude: 40, longitude: -105, elevationM: 1600,
    supplyFlowLpm: 60, staticPressureKPa: 400, supplyMarginPct: 20,
  });
  const [a] = await db.insert(sites).values(site('Test Site A', 'America/Denver')).returning();
  const [b] = await db.insert(sites).values(site('Test Site B', 'Europe/Lisbon')).returning();
  const ctrl = (siteId: number, serial: string) => ({
    siteId, serial, name: `Board ${serial}`, relayCount: 6, staggerMs: 300, maxConcurrentValves: 2, hasFlowSensor: true,
  });
  const [ca] = await db.insert(controllers).values(ctrl(a.id, 'TEST-A-0001')).returning();
  const [cb] = await db.insert(controllers).values(ctrl(b.id, 'TEST-B-0001')).returning();
  const zone = (controllerId: number, relay: number, name: string) => ({
    controllerId, relay, name, plantType: 'cool_season_turf' as const, soilTexture: 'loam' as const,
    headType: 'spray' as const, headCount: 6, flowPerHeadLpm: 5, areaM2: 100, rootDepthM: 0.15, efficiency: 0.7,
  });
  const [za] = await db.insert(zones).values(zone(ca.id, 1, 'Zone A1')).returning();
  const [zb] = await db.insert(zones).values(zone(cb.id, 1, 'Zone B1')).returning();
  const mk = async (role: 'admin' | 'manager' | 'technician' | 'owner') => {
    const email = `${role}@fixture.test`;
    const [u] = await db.insert(users).values({ email, name: `Fixture ${role}`, role, passwordHash: hash }).returning();
    return { id: u.id, email };
  };
  const us = { admin: await mk('admin'), manager: await mk('manager'), technician: await mk('technician'), owner: await mk('owner') };
  await db.insert(siteMembers).values([
    { siteId: a.id, userId: us.technician.id },
    { siteId: a.id, userId: us.owner.id },
  ]);
  return { users: us, siteA: a.id, siteB: b.id, controllerA: ca.id, controllerB: cb.id, zoneA: za.id, zoneB: zb.id };
}
