import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Express } from 'express';
import { weatherDays, zones } from '../../server/db/schema/index';
import {
  groupHeadsIntoZones,
  hazenWilliamsLoss,
  headLossKPa,
  maxHeadsPerZone,
  pipeVelocity,
  precipitationRate,
  zoneWarnings,
} from '../../server/domain/hydraulics';
import { soilWaterBalance, wateringNeed } from '../../server/domain/agronomy';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

type Agent = Awaited<ReturnType<typeof signedIn>>;

let tdb: TestDb;
let app: Express;
let f: Fixture;
let manager: Agent;
let owner: Agent;
let technician: Agent;

// Fixture site A: supply 60 L/min, margin 20 % → 48 L/min usable.
// Zone A1 (fixture): 6 sprays × 5 L/min over 100 m², loam, cool-season turf, roots 0.15 m, efficiency 0.7.
const extraZones = (controllerId: number) => [
  {
    controllerId, relay: 2, name: 'Big rotors', plantType: 'cool_season_turf' as const, soilTexture: 'loam' as const,
    headType: 'rotor' as const, headCount: 6, flowPerHeadLpm: 10, areaM2: 600, rootDepthM: 0.15, efficiency: 0.75,
  },
  {
    controllerId, relay: 3, name: 'Clay bank', plantType: 'cool_season_turf' as const, soilTexture: 'clay' as const,
    headType: 'spray' as const, headCount: 4, flowPerHeadLpm: 5, areaM2: 80, rootDepthM: 0.15, efficiency: 0.7,
  },
];
type ZoneRow = typeof zones.$inferSelect;
let siteZones: ZoneRow[];

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  await tdb.db.insert(zones).values(extraZones(f.controllerA));
  siteZones = (await tdb.db.select().from(zones)).filter((z) => z.controllerId === f.controllerA).sort((a, b) => a.relay - b.relay);
  app = buildTestApp(tdb).app;
  manager = await signedIn(app, f.users.manager.email);
  owner = await signedIn(app, f.users.owner.email);
  technician = await signedIn(app, f.users.technician.email);
});
afterAll(async () => {
  await tdb.drop();
});

describe('zone planning against the supply and a pipe', () => {
  it('gives for every zone the same numbers as the domain functions (default pipe 25 mm × 30 m)', async () => {
    const res = await owner.get(`/api/sites/${f.siteA}/planning`);
    expect(res.status).toBe(200);
    expect(res.body.site).toMatchObject({ supplyFlowLpm: 60, supplyMarginPct: 20, usableSupplyLpm: 48 });
    expect(res.body.pipe).toEqual({ innerDiameterMm: 25, lengthM: 30, c: 150 });
    expect(res.body.zones.map((z: { id: number }) => z.id)).toEqual(siteZones.map((z) => z.id));
    for (const [i, z] of siteZones.entries()) {
      const got = res.body.zones[i];
      const flow = z.headCount * z.flowPerHeadLpm;
      const loss = hazenWilliamsLoss(flow, 25, 30);
      expect(got.flowLpm).toBeCloseTo(flow, 2);
      expect(got.maxHeadsPerZone).toBe(maxHeadsPerZone(60, z.flowPerHeadLpm, 20));
      expect(got.precipitationRateMmH).toBeCloseTo(precipitationRate(flow, z.areaM2), 2);
      expect(got.pipeVelocityMs).toBeCloseTo(pipeVelocity(flow, 25), 3);
      expect(got.frictionLossM).toBeCloseTo(loss, 3);
      expect(got.frictionLossKPa).toBeCloseTo(headLossKPa(loss), 2);
      expect(got.warnings).toEqual(
        zoneWarnings({
          flowLpm: flow, headTypes: z.otherHeadType ? [z.headType, z.otherHeadType] : [z.headType], supplyLpm: 60, marginPct: 20, innerDiameterMm: 25,
        }),
      );
    }
  });

  it('shows hand-checkable figures for the fixture zone: 30 L/min, 9 heads allowed, 18 mm/h', async () => {
    const res = await manager.get(`/api/sites/${f.siteA}/planning`);
    const a1 = res.body.zones.find((z: { id: number }) => z.id === f.zoneA);
    // 6 × 5 = 30 L/min; floor(48 / 5) = 9 heads; 60 × 30 / 100 = 18 mm/h; 0.0005 m³/s / (π 0.025² / 4) = 1.019 m/s
    expect(a1).toMatchObject({ flowLpm: 30, maxHeadsPerZone: 9, headsOverLimit: 0, precipitationRateMmH: 18, pipeVelocityMs: 1.019, warnings: [] });
  });

  it('warns about a zone over the usable supply and a pipe too fast for its flow', async () => {
    const res = await manager.get(`/api/sites/${f.siteA}/planning?pipeMm=32&pipeLengthM=50`);
    const big = res.body.zones.find((z: { name: string }) => z.name === 'Big rotors');
    // 60 L/min > 48 usable; floor(48 / 10) = 4 heads, so 2 too many; in 32 mm: 1.243 m/s, under 1.5
    expect(big).toMatchObject({ flowLpm: 60, maxHeadsPerZone: 4, headsOverLimit: 2 });
    expect(big.warnings.map((w: { code: string }) => w.code)).toEqual(['over_supply']);
    const narrow = await manager.get(`/api/sites/${f.siteA}/planning?pipeMm=25`);
    const fast = narrow.body.zones.find((z: { name: string }) => z.name === 'Big rotors');
    expect(fast.warnings.map((w: { code: string }) => w.code)).toEqual(['over_supply', 'velocity_high']);
    expect(fast.pipeVelocityMs).toBeGreaterThan(1.5);
  });

  it('refuses a pipe of 0 mm with a 400 naming pipeMm', async () => {
    const res = await manager.get(`/api/sites/${f.siteA}/planning?pipeMm=0`);
    expect(res.status).toBe(400);
    expect(res.body.error.details.map((d: { path: string }) => d.path)).toEqual(['pipeMm']);
  });

  it('refuses a bore too small to compute a friction loss for with a 400 naming pipeMm', async () => {
    // 30 L/min through 1e-300 mm: the loss would be infinite
    const res = await manager.get(`/api/sites/${f.siteA}/planning?pipeMm=1e-300`);
    expect(res.status).toBe(400);
    expect(res.body.error.details.map((d: { path: string }) => d.path)).toEqual(['pipeMm']);
  });
});

describe('grouping heads into zones', () => {
  const heads = [
    ...Array.from({ length: 10 }, (_, i) => ({ id: `s${i + 1}`, flowLpm: 5, headType: 'spray' })),
    ...Array.from({ length: 3 }, (_, i) => ({ id: `r${i + 1}`, flowLpm: 12, headType: 'rotor' })),
  ];

  it('proposes the zones groupHeadsIntoZones gives: sprays and rotors apart, each within the usable supply', async () => {
    const res = await owner.post('/api/planning/group-heads').send({ supplyLpm: 60, marginPct: 20, heads });
    expect(res.status).toBe(200);
    const expected = groupHeadsIntoZones(heads as never, 60, 20);
    expect(res.body.zones.map((z: { headType: string; headIds: string[]; flowLpm: number }) => ({ headType: z.headType, headIds: z.headIds, flowLpm: z.flowLpm }))).toEqual(expected);
    // 48 L/min usable: nine sprays (45), then one spray (5), then three rotors (36)
    expect(res.body).toMatchObject({ usableSupplyLpm: 48, zoneCount: 3 });
    expect(res.body.zones.map((z: { headCount: number }) => z.headCount)).toEqual([9, 1, 3]);
  });

  it('refuses a head that alone exceeds the usable supply, naming it', async () => {
    const res = await owner.post('/api/planning/group-heads').send({ supplyLpm: 60, marginPct: 20, heads: [{ id: 'x', flowLpm: 50, headType: 'rotor' }] });
    expect(res.status).toBe(400);
    expect(res.body.error.details.map((d: { path: string }) => d.path)).toEqual(['heads.0.flowLpm']);
  });

  it('refuses two heads with the same id and an empty list', async () => {
    const dup = await owner.post('/api/planning/group-heads').send({ supplyLpm: 60, heads: [heads[0], heads[0]] });
    expect(dup.status).toBe(400);
    expect(dup.body.error.details[0].path).toBe('heads.1.id');
    const empty = await owner.post('/api/planning/group-heads').send({ supplyLpm: 60, heads: [] });
    expect(empty.status).toBe(400);
    expect(empty.body.error.details[0].path).toBe('heads');
  });
});

describe('watering need from stored weather', () => {
  // Three known July days: ET₀ 5, 6, 7 mm; 10 mm of rain on the third.
  const july = [
    { date: '2025-07-01', et0Mm: 5, rainMm: 0 },
    { date: '2025-07-02', et0Mm: 6, rainMm: 0 },
    { date: '2025-07-03', et0Mm: 7, rainMm: 10 },
  ];

  beforeAll(async () => {
    await tdb.db.insert(weatherDays).values(
      july.map((d) => ({ ...d, siteId: f.siteA, tmaxC: 30, tminC: 15, et0Method: 'test', source: 'manual' as const })),
    );
  });

  it('replaces a hand-checked depletion: demand Σ ET₀ × Kc, effective rain, and the minutes for it', async () => {
    const res = await owner.get(`/api/sites/${f.siteA}/watering-need?days=3&to=2025-07-03`);
    expect(res.status).toBe(200);
    expect(res.body).toMatchObject({ from: '2025-07-01', to: '2025-07-03', days: 3, daysWithWeather: 3, missingDates: [] });
    expect(res.body.series).toEqual(july);
    expect(res.body.totals).toEqual({ et0Mm: 18, rainMm: 10 });
    const a1 = res.body.zones.find((z: { id: number }) => z.id === f.zoneA);
    // Cool-season turf in July: Kc 0.85 → demand 18 × 0.85 = 15.3 mm.
    // Effective rain (common practice): 0.8 × (10 − 3) = 5.6 mm.
    // Depletion: 4.25 → 9.35 → 9.35 − 5.6 + 5.95 = 9.7 mm (TAW loam 0.155 × 150 mm = 23.25 mm).
    // Minutes: 9.7 mm / 0.7 / 18 mm/h × 60 = 46.19 min, one cycle (loam takes in 15 mm/h: runoff limit 60 × 2.5 / 3 = 50 min).
    expect(a1).toMatchObject({
      et0Mm: 18, plantCoefficient: 0.85, plantDemandMm: 15.3, rainMm: 10, effectiveRainMm: 5.6, depletionMm: 9.7,
      tawMm: 23.25, needsWater: true, netDepthMm: 9.7, grossDepthMm: 13.86, minutes: 46.2, cycles: [46.19], soakMinutes: 0,
    });
  });

  it('gives every zone the depletion of soilWaterBalance and the run of wateringNeed, cycles included', async () => {
    const res = await manager.get(`/api/sites/${f.siteA}/watering-need?days=3&to=2025-07-03`);
    const days = july.map((d) => ({ et0Mm: d.et0Mm, rainMm: d.rainMm, irrigationMm: 0, month: 7 }));
    for (const z of siteZones) {
      const got = res.body.zones.find((x: { id: number }) => x.id === z.id);
      const balance = soilWaterBalance(days, { plantType: z.plantType, soil: z.soilTexture, rootDepthM: z.rootDepthM, latitudeDeg: 40 });
      const depletion = balance[2].depletionMm;
      const pr = precipitationRate(z.headCount * z.flowPerHeadLpm, z.areaM2);
      const need = wateringNeed({ depletionMm: depletion, precipitationRateMmH: pr, efficiency: z.efficiency, soil: z.soilTexture });
      expect(got.depletionMm).toBeCloseTo(depletion, 2);
      expect(got.rawMm).toBeCloseTo(balance[2].rawMm, 2);
      expect(got.minutes).toBeCloseTo(need.minutes, 1);
      expect(got.cycles).toHaveLength(need.cycles.length);
      got.cycles.forEach((c: number, i: number) => expect(c).toBeCloseTo(need.cycles[i], 2));
      expect(got.soakMinutes).toBe(need.soakMinutes);
    }
    // The clay bank (15 mm/h on soil that takes in 3 mm/h) needs cycle and soak.
    const clay = res.body.zones.find((x: { name: string }) => x.name === 'Clay bank');
    expect(clay.cycles.length).toBeGreaterThan(1);
    expect(clay.cycles.reduce((a: number, b: number) => a + b, 0)).toBeCloseTo(clay.minutes, 1);
  });

  it('lists the days without stored weather and leaves them out of the balance', async () => {
    const res = await owner.get(`/api/sites/${f.siteA}/watering-need?days=5&to=2025-07-03`);
    expect(res.body).toMatchObject({ from: '2025-06-29', daysWithWeather: 3, missingDates: ['2025-06-29', '2025-06-30'] });
    expect(res.body.zones.find((z: { id: number }) => z.id === f.zoneA).depletionMm).toBe(9.7);
  });

  it('answers zero need when no weather is stored', async () => {
    const res = await owner.get(`/api/sites/${f.siteA}/watering-need?days=7&to=2024-01-07`);
    expect(res.body.daysWithWeather).toBe(0);
    expect(res.body.zones.every((z: { minutes: number; cycles: number[] }) => z.minutes === 0 && z.cycles.length === 0)).toBe(true);
  });

  it('refuses more than 60 days and answers 404 on a site the owner is not a member of', async () => {
    expect((await owner.get(`/api/sites/${f.siteA}/watering-need?days=61`)).status).toBe(400);
    expect((await owner.get(`/api/sites/${f.siteB}/watering-need`)).status).toBe(404);
    expect((await owner.get(`/api/sites/${f.siteB}/planning`)).status).toBe(404);
  });
});

describe('another head type found on a zone', () => {
  // Two rotor zones on relays 4 and 5 of the fixture board: 4 rotors × 10 L/min over 400 m².
  const rotorZone = (relay: number, name: string) => ({
    controllerId: f.controllerA, relay, name, plantType: 'cool_season_turf', soilTexture: 'loam',
    headType: 'rotor', headCount: 4, flowPerHeadLpm: 10, areaM2: 400, rootDepthM: 0.15,
  });
  let mixedId: number;
  let rotorsId: number;

  beforeAll(async () => {
    const mixed = await manager.post('/api/zones').send({ ...rotorZone(4, 'Survey rotors'), otherHeadType: 'spray' });
    expect(mixed.status).toBe(201);
    expect(mixed.body.otherHeadType).toBe('spray');
    mixedId = mixed.body.id;
    const rotors = await manager.post('/api/zones').send(rotorZone(5, 'Rotors only'));
    expect(rotors.status).toBe(201);
    expect(rotors.body.otherHeadType).toBeNull();
    rotorsId = rotors.body.id;
  });

  it('warns about sprays mixed with rotors on the zone that has both, and not on the rotors-only zone', async () => {
    // common practice (design.md): sprays and rotors differ by an order of magnitude in
    // precipitation rate, so zones never mix them
    const res = await owner.get(`/api/sites/${f.siteA}/planning?pipeMm=50`);
    expect(res.status).toBe(200);
    const mixed = res.body.zones.find((z: { id: number }) => z.id === mixedId);
    const rotors = res.body.zones.find((z: { id: number }) => z.id === rotorsId);
    expect(mixed).toMatchObject({ headType: 'rotor', otherHeadType: 'spray' });
    expect(mixed.warnings.map((w: { code: string }) => w.code)).toEqual(['mixed_spray_rotor']);
    expect(mixed.warnings).toEqual(zoneWarnings({ flowLpm: 40, headTypes: ['rotor', 'spray'] }));
    // 40 L/min within 48 usable and 0.34 m/s in 50 mm: nothing else to say
    expect(rotors).toMatchObject({ headType: 'rotor', otherHeadType: null, warnings: [] });
  });

  it('warns about other mixes apart from sprays with rotors, and stops once the other type is cleared', async () => {
    const drip = await technician.patch(`/api/zones/${rotorsId}`).send({ otherHeadType: 'bubbler' });
    expect(drip.status).toBe(200);
    let res = await owner.get(`/api/sites/${f.siteA}/planning?pipeMm=50`);
    let z = res.body.zones.find((x: { id: number }) => x.id === rotorsId);
    expect(z.warnings.map((w: { code: string }) => w.code)).toEqual(['mixed_head_types']);
    expect((await technician.patch(`/api/zones/${rotorsId}`).send({ otherHeadType: null })).status).toBe(200);
    res = await owner.get(`/api/sites/${f.siteA}/planning?pipeMm=50`);
    z = res.body.zones.find((x: { id: number }) => x.id === rotorsId);
    expect(z.warnings).toEqual([]);
  });

  it('refuses another head type equal to the zone\'s own, or unknown, naming otherHeadType, and changes nothing', async () => {
    const same = await manager.post('/api/zones').send({ ...rotorZone(6, 'Same twice'), otherHeadType: 'rotor' });
    expect(same.status).toBe(400);
    expect(same.body.error.details.map((d: { path: string }) => d.path)).toEqual(['otherHeadType']);
    const unknown = await manager.patch(`/api/zones/${mixedId}`).send({ otherHeadType: 'mist' });
    expect(unknown.status).toBe(400);
    expect(unknown.body.error.details.map((d: { path: string }) => d.path)).toEqual(['otherHeadType']);
    const both = await manager.patch(`/api/zones/${mixedId}`).send({ headType: 'spray', otherHeadType: 'spray' });
    expect(both.status).toBe(400);
    // against the stored head type: rotor zone, "other" rotor; or the head type turned into the other one
    for (const body of [{ otherHeadType: 'rotor' }, { headType: 'spray' }]) {
      const stored = await manager.patch(`/api/zones/${mixedId}`).send(body);
      expect(stored.status).toBe(400);
      expect(stored.body.error.details.map((d: { path: string }) => d.path)).toEqual(['otherHeadType']);
    }
    const [row] = (await tdb.db.select().from(zones)).filter((x) => x.id === mixedId);
    expect(row).toMatchObject({ headType: 'rotor', otherHeadType: 'spray' });
    expect((await owner.patch(`/api/zones/${mixedId}`).send({ otherHeadType: null })).status).toBe(403);
  });
});
