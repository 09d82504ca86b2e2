import { sql } from 'drizzle-orm';
import { controllers, sites, users, zones } from '../server/db/schema/index';
import { hashDeviceSecret } from '../server/services/device-secrets';
import { hashPassword } from '../server/services/auth';
import type { BenchDb } from './common';

export const BENCH_SECRET = 'bench-secret-shared-by-every-simulated-board';
export const BENCH_PASSWORD = 'bench-password-1';

/**
 * N controllers (10 to a site), each with `zonesPer` zones on relays 1…zonesPer. One secret
 * hash serves every board (verified once, then cached), so connecting 2,000 boards does not
 * spend a minute in argon2.
 */
export async function buildFleet(db: BenchDb, n: number, opts: { zonesPer?: number; relayCount?: number; cap?: number; staggerMs?: number; allowParallel?: boolean } = {}) {
  const zonesPer = opts.zonesPer ?? 4;
  const hash = await hashDeviceSecret(BENCH_SECRET);
  const siteCount = Math.ceil(n / 10);
  const siteRows = Array.from({ length: siteCount }, (_, i) => ({
    name: `Bench site ${i + 1}`, timezone: 'America/Denver', latitude: 39.7, longitude: -105, elevationM: 1600,
    supplyFlowLpm: 5000, staticPressureKPa: 450, supplyMarginPct: 10, allowParallel: opts.allowParallel ?? true,
  }));
  const siteIds: number[] = [];
  for (let i = 0; i < siteRows.length; i += 500) siteIds.push(...(await db.db.insert(sites).values(siteRows.slice(i, i + 500)).returning({ id: sites.id })).map((r) => r.id));
  const ctrlRows = Array.from({ length: n }, (_, i) => ({
    serial: `BENCH-${String(i + 1).padStart(5, '0')}`, name: `Bench board ${i + 1}`, siteId: siteIds[Math.floor(i / 10)],
    relayCount: opts.relayCount ?? 8, staggerMs: opts.staggerMs ?? 100, maxConcurrentValves: opts.cap ?? 4, hasFlowSensor: true, secretHash: hash,
  }));
  const ctrlIds: number[] = [];
  for (let i = 0; i < ctrlRows.length; i += 1000) ctrlIds.push(...(await db.db.insert(controllers).values(ctrlRows.slice(i, i + 1000)).returning({ id: controllers.id })).map((r) => r.id));
  const zoneRows = ctrlIds.flatMap((cid) =>
    Array.from({ length: zonesPer }, (_, k) => ({
      controllerId: cid, relay: k + 1, name: `Zone ${k + 1}`, plantType: 'cool_season_turf' as const, soilTexture: 'loam' as const,
      headType: 'rotor' as const, headCount: 4, flowPerHeadLpm: 10, areaM2: 400, rootDepthM: 0.15, efficiency: 0.75,
    })),
  );
  for (let i = 0; i < zoneRows.length; i += 2000) await db.db.insert(zones).values(zoneRows.slice(i, i + 2000));
  await db.db.insert(users).values({ email: 'bench@runnel.test', name: 'Bench', role: 'admin', passwordHash: await hashPassword(BENCH_PASSWORD) });
  const boards = ctrlRows.map((c) => ({
    serial: c.serial, secret: BENCH_SECRET, relayCount: c.relayCount, hasFlowSensor: true, masterValveRelay: null,
    relayFlowsLpm: Object.fromEntries(Array.from({ length: zonesPer }, (_, k) => [k + 1, 40])),
  }));
  const zoneIds = (await db.db.execute(sql`select id from zones order by id`)).rows.map((r) => r.id as number);
  return { boards, zoneIds, siteIds, ctrlIds };
}
