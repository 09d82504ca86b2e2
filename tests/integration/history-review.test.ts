import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { runs, weatherDays, zoneRuns } from '../../server/db/schema/index';
import { DEPLETION_FRACTION, adjustedDepletionFraction, soilWaterBalance, totalAvailableWater } from '../../server/domain/agronomy';
import { rebuildRollups } from '../../server/history/rollup';
import { summaryLine } from '../../server/history/review';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;

/**
 * The hand-checkable example. Zone A1: cool-season turf (Kc 0.85 in July, latitude 40° N), loam
 * (available water 0.155) over 0.15 m of roots → TAW 23.25 mm; 6 spray heads × 5 L/min on 100 m²,
 * efficiency 0.7. Five July days at ET₀ 5 mm (ETc 4.25 mm); 13 mm of rain on day 3 (effective
 * 0.8 × (13 − 3) = 8 mm); one 10-minute run on day 4: 300 L → 3 mm gross → 2.1 mm net.
 *   depletion: 4.25, 8.5, 4.75, 6.9, 11.15 mm
 *   demand 21.25 mm; met = (8 + 2.1) / 21.25 = 47.5 % → 48 %
 */
const DAYS = ['2025-07-07', '2025-07-08', '2025-07-09', '2025-07-10', '2025-07-11'];

async function zoneRun(date: string, state: (typeof zoneRuns.$inferInsert)['state'], reason: string | null, actual: number | null) {
  const start = new Date(`${date}T12:00:00Z`); // 06:00 in Denver
  const [run] = await tdb.db.insert(runs).values({ siteId: f.siteA, kind: 'program', scheduledFor: start, state: 'completed' }).returning();
  await tdb.db.insert(zoneRuns).values({
    runId: run.id, siteId: f.siteA, zoneId: f.zoneA, controllerId: f.controllerA, position: 1, plannedStart: start,
    plannedEnd: new Date(start.getTime() + 600_000), plannedMinutes: 10, actualStart: actual ? start : null,
    actualEnd: actual ? new Date(start.getTime() + actual * 60_000) : null, actualMinutes: actual, estimatedLitres: actual ? actual * 30 : 0,
    state, reason,
  });
}

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  for (const [i, date] of DAYS.entries()) {
    await tdb.db.insert(weatherDays).values({ siteId: f.siteA, date, tmaxC: 30, tminC: 14, rainMm: i === 2 ? 13 : 0, et0Mm: 5, et0Method: 'test', source: 'manual' });
  }
  await zoneRun('2025-07-10', 'completed', null, 10);
  await zoneRun('2025-07-08', 'skipped_restriction', 'No watering on Tuesdays at this site', null);
  await zoneRun('2025-07-11', 'skipped_restriction', 'No watering on Tuesdays at this site', null);
  await zoneRun('2025-07-09', 'held_rain', 'Held by rain: the rain sensor is wet', null);
  await zoneRun('2025-07-07', 'failed', 'no acknowledgement from Board TEST-A-0001 after 3 tries', null);
  await rebuildRollups(tdb.db, { from: '2025-06-01', to: '2025-07-31' });
});
afterAll(async () => {
  await tdb.drop();
});

describe('the dry-spell review', () => {
  it('matches the hand-worked demand, rain, water applied and depletion, and the computations library', async () => {
    const owner = await signedIn(app, f.users.owner.email);
    const res = await owner.get(`/api/sites/${f.siteA}/review?from=${DAYS[0]}&to=${DAYS[4]}`);
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ from: DAYS[0], to: DAYS[4], days: 5, weatherDays: 5, missingWeatherDays: [], warmUpDays: 0 });
    const z = res.body.zones[0];
    expect(z).toMatchObject({
      zoneId: f.zoneA, demandMm: 21.3, effectiveRainMm: 8, rainMm: 13, litres: 300, litresBasis: 'estimated',
      appliedMm: 3, appliedNetMm: 2.1, demandMetPct: 48, tawMm: 23.3, finalDepletionMm: 11.2, maxDepletionMm: 11.2, stressDays: 1,
    });
    expect(z.depletion.map((d: { depletionMm: number }) => d.depletionMm)).toEqual([4.25, 8.5, 4.75, 6.9, 11.15]);
    expect(z.depletion.map((d: { etcMm: number }) => d.etcMm)).toEqual([4.25, 4.25, 4.25, 4.25, 4.25]);
    expect(z.depletion[3].irrigationMm).toBe(2.1);
    const taw = totalAvailableWater('loam', 0.15);
    expect(taw).toBeCloseTo(23.25, 9);
    expect(z.depletion[4].rawMm).toBeCloseTo(adjustedDepletionFraction(DEPLETION_FRACTION.cool_season_turf, 4.25) * taw, 2);
    // …and the same as the library computes from the same days.
    const lib = soilWaterBalance(
      DAYS.map((d, i) => ({ et0Mm: 5, rainMm: i === 2 ? 13 : 0, irrigationMm: i === 3 ? 2.1 : 0, month: 7 })),
      { plantType: 'cool_season_turf', soil: 'loam', rootDepthM: 0.15, latitudeDeg: 40 },
    );
    expect(z.depletion.map((d: { depletionMm: number }) => d.depletionMm)).toEqual(lib.map((b) => Math.round(b.depletionMm * 100) / 100));
    expect(z.depletion.map((d: { needsWater: boolean }) => d.needsWater)).toEqual(lib.map((b) => b.needsWater));
  });

  it('lists every run that did not go as planned with its reason, and says it in one line', async () => {
    const mgr = await signedIn(app, f.users.manager.email);
    const res = await mgr.get(`/api/sites/${f.siteA}/review?from=${DAYS[0]}&to=${DAYS[4]}`);
    const z = res.body.zones[0];
    expect(z.notAsPlanned.map((m: { localDate: string; category: string }) => [m.localDate, m.category])).toEqual([
      ['2025-07-07', 'fault'], ['2025-07-08', 'restriction'], ['2025-07-09', 'rain_hold'], ['2025-07-11', 'restriction'],
    ]);
    expect(z.counts).toEqual({ rain_hold: 1, restriction: 2, not_needed: 0, fault: 1, stopped: 0 });
    expect(z.summary).toBe(
      'Zone A1 received 48 % of its demand: 2 runs skipped for the restriction: no watering on Tuesdays at this site; 1 run failed: no acknowledgement from Board TEST-A-0001 after 3 tries; 1 run held by rain.',
    );
    expect(res.body.summary).toEqual([z.summary]);
  });

  it('warms the soil-water balance up over the days before the period, as the scheduler does', async () => {
    const mgr = await signedIn(app, f.users.manager.email);
    const res = await mgr.get(`/api/sites/${f.siteA}/review?from=${DAYS[2]}&to=${DAYS[4]}`);
    const z = res.body.zones[0];
    expect(res.body.warmUpDays).toBe(2);
    expect(z.depletion.map((d: { depletionMm: number }) => d.depletionMm)).toEqual([4.75, 6.9, 11.15]);
    expect(z.demandMm).toBe(12.8);
  });

  it('defaults to the last 30 days, and keeps other sites out of sight', async () => {
    const owner = await signedIn(app, f.users.owner.email);
    const res = await owner.get(`/api/sites/${f.siteA}/review`);
    expect(res.status).toBe(200);
    expect(res.body.days).toBe(30);
    expect((await owner.get(`/api/sites/${f.siteB}/review`)).status).toBe(404);
    expect((await owner.get(`/api/sites/${f.siteA}/review?from=2024-01-01&to=2025-07-01`)).status).toBe(400);
  });

  it('words a zone whose every run went ahead, and one without weather', () => {
    expect(summaryLine('Front lawn', 98, [])).toBe('Front lawn received 98 % of its demand; every run went as planned.');
    expect(summaryLine('Beds', null, [])).toMatch(/no weather is recorded/);
  });
});
