import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import request from 'supertest';
import type { Express } from 'express';
import { parse as parseCsv } from 'csv-parse/sync';
import { sql } from 'drizzle-orm';
import { controllers, programs, runs, weatherDays, zoneRuns, zones } from '../../server/db/schema/index';
import { plantCoefficient } from '../../server/domain/agronomy';
import { LiveBus } from '../../server/live/bus';
import { realClock } from '../../server/clock';
import { RollupKeeper, rebuildRollups } from '../../server/history/rollup';
import { recomputeHours } from '../../server/history/readings-rollup';
import { ReadingWriter, addToHour, copyLine, type HourSums } from '../../server/ingest/reading-writer';
import { pino } from 'pino';
import { createTestDb, type TestDb } from '../helpers/db';
import { buildTestApp, signedIn } from '../helpers/api';
import { seedFixture, type Fixture } from '../helpers/fixtures';

let tdb: TestDb;
let app: Express;
let f: Fixture;
let agent: Record<'manager' | 'owner' | 'technician', ReturnType<typeof request.agent>>;
let programId: number;
/** A zone on a second controller of site A that has no flow sensor: its litres are always estimated. */
let dripZone: number;
let dripController: number;

type RunSpec = {
  zoneId: number; controllerId: number; siteId: number; start: string; minutes: number;
  actual?: number | null; measured?: number | null; flowLpm: number; state?: (typeof zoneRuns.$inferInsert)['state']; reason?: string;
  programId?: number | null; cycle?: number;
};

async function addRun(s: RunSpec) {
  const startMs = Date.parse(s.start);
  const [run] = await tdb.db.insert(runs).values({
    siteId: s.siteId, programId: s.programId ?? null, kind: s.programId ? 'program' : 'manual', scheduledFor: new Date(startMs), state: 'completed',
  }).returning();
  const actual = s.actual === undefined ? s.minutes : s.actual;
  const [zr] = await tdb.db.insert(zoneRuns).values({
    runId: run.id, siteId: s.siteId, zoneId: s.zoneId, controllerId: s.controllerId, position: 1, cycle: s.cycle ?? 0,
    plannedStart: new Date(startMs), plannedEnd: new Date(startMs + s.minutes * 60_000), plannedMinutes: s.minutes,
    actualStart: actual ? new Date(startMs) : null, actualEnd: actual ? new Date(startMs + actual * 60_000) : null, actualMinutes: actual,
    estimatedLitres: actual ? s.flowLpm * actual : 0, measuredLitres: s.measured ?? null,
    state: s.state ?? 'completed', reason: s.reason ?? null,
  }).returning();
  return zr;
}

beforeAll(async () => {
  tdb = await createTestDb();
  f = await seedFixture(tdb.db);
  app = buildTestApp(tdb).app;
  const [c] = await tdb.db.insert(controllers).values({ siteId: f.siteA, serial: 'TEST-A-0002', name: 'Board A2', relayCount: 4, hasFlowSensor: false }).returning();
  dripController = c.id;
  const [z] = await tdb.db.insert(zones).values({
    controllerId: c.id, relay: 1, name: 'Drip beds', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip',
    headCount: 40, flowPerHeadLpm: 0.5, areaM2: 50, rootDepthM: 0.4, efficiency: 0.9,
  }).returning();
  dripZone = z.id;
  const [p] = await tdb.db.insert(programs).values({
    siteId: f.siteA, name: 'Early mornings', startTimes: ['05:00'], dayRule: { kind: 'weekdays', weekdays: [1, 3, 5] }, crons: ['0 5 * * 1,3,5'],
  }).returning();
  programId = p.id;
  // Site A is in America/Denver (UTC−6 in summer). Zone A1: 30 L/min nominal, 100 m², flow sensor.
  const A1 = { zoneId: f.zoneA, controllerId: f.controllerA, siteId: f.siteA, flowLpm: 30 };
  const D = { zoneId: dripZone, controllerId: dripController, siteId: f.siteA, flowLpm: 20 };
  await addRun({ ...A1, start: '2025-07-01T11:00:00Z', minutes: 10, measured: 310, programId });
  await addRun({ ...A1, start: '2025-07-01T11:30:00Z', minutes: 10, actual: 8, measured: null, programId, cycle: 1 }); // overlap: no measurement
  await addRun({ ...A1, start: '2025-07-02T11:00:00Z', minutes: 10, actual: 10, measured: 285.5 });
  await addRun({ ...A1, start: '2025-07-03T11:00:00Z', minutes: 10, actual: null, state: 'skipped_restriction', reason: 'No watering on Thursdays at this site', programId });
  await addRun({ ...A1, start: '2025-07-04T11:00:00Z', minutes: 10, actual: null, state: 'held_rain', reason: 'Held by rain: the rain sensor is wet', programId });
  await addRun({ ...D, start: '2025-07-01T12:00:00Z', minutes: 15, programId });
  await addRun({ ...D, start: '2025-07-02T12:00:00Z', minutes: 15, actual: 6, state: 'stopped', reason: 'Stopped by a user', programId });
  // 2025-07-02T04:30Z is still 1 July in Denver: it counts on the 1st.
  await addRun({ ...D, start: '2025-07-02T04:30:00Z', minutes: 5 });
  // June, for the month-over-month comparison.
  await addRun({ ...A1, start: '2025-06-15T11:00:00Z', minutes: 20, measured: 600, programId });
  await addRun({ ...D, start: '2025-06-16T12:00:00Z', minutes: 30, programId });
  // Site B: must never appear for site A's owner.
  await addRun({ zoneId: f.zoneB, controllerId: f.controllerB, siteId: f.siteB, start: '2025-07-01T07:00:00Z', minutes: 12, measured: 350, flowLpm: 30 });
  for (const [date, et0, rain] of [['2025-07-01', 6, 0], ['2025-07-02', 5.5, 0], ['2025-07-03', 4, 12], ['2025-07-04', 6.2, 0]] as const) {
    await tdb.db.insert(weatherDays).values({ siteId: f.siteA, date, tmaxC: 32, tminC: 15, rainMm: rain, et0Mm: et0, et0Method: 'test', source: 'manual' });
  }
  await rebuildRollups(tdb.db, { from: '2025-06-01', to: '2025-07-31' });
  agent = {
    manager: await signedIn(app, f.users.manager.email),
    owner: await signedIn(app, f.users.owner.email),
    technician: await signedIn(app, f.users.technician.email),
  };
});
afterAll(async () => {
  await tdb.drop();
});

const allPages = async (who: keyof typeof agent, query: string) => {
  const out: { id: number }[] = [];
  for (let page = 1; ; page++) {
    const res = await agent[who].get(`/api/history/zone-runs?${query}&page=${page}&pageSize=3`);
    expect(res.status).toBe(200);
    out.push(...res.body.items);
    if (out.length >= res.body.total) return out;
  }
};

describe('water use', () => {
  it('sums the zone runs it comes from, measured where measured and estimated otherwise', async () => {
    const res = await agent.manager.get(`/api/history/water-use?siteId=${f.siteA}&from=2025-07-01&to=2025-07-04`);
    expect(res.status).toBe(200);
    const raw = await tdb.db.execute<{ zone_id: number; litres: number; measured: number; estimated: number }>(sql`
      select zone_id, sum(coalesce(measured_litres, estimated_litres)) as litres, coalesce(sum(measured_litres), 0) as measured,
        coalesce(sum(estimated_litres) filter (where measured_litres is null), 0) as estimated
      from zone_runs where site_id = ${f.siteA} and planned_start >= '2025-07-01T06:00:00Z' and planned_start < '2025-07-05T06:00:00Z'
      group by zone_id`);
    const byZone = new Map(raw.rows.map((r) => [Number(r.zone_id), r]));
    for (const z of res.body.zones) {
      const want = byZone.get(z.zoneId)!;
      expect(z.totals.litres).toBeCloseTo(Number(want.litres), 1);
      expect(z.totals.measuredLitres).toBeCloseTo(Number(want.measured), 1);
      expect(z.totals.estimatedLitres).toBeCloseTo(Number(want.estimated), 1);
    }
    // Zone A1: 310 measured + 8 min × 30 = 240 estimated on the 1st; 285.5 measured on the 2nd.
    const a1 = res.body.zones.find((z: { zoneId: number }) => z.zoneId === f.zoneA);
    expect(a1.series.map((p: { litres: number; basis: string }) => [p.litres, p.basis])).toEqual([[550, 'mixed'], [285.5, 'measured'], [0, 'none'], [0, 'none']]);
    expect(a1.series[0].appliedMm).toBe(5.5); // 550 L over 100 m²
    // Drip beds (no sensor): 15 min × 20 L/min on the 1st plus the 04:30 UTC run (still 1 July locally), 6 min on the 2nd.
    const drip = res.body.zones.find((z: { zoneId: number }) => z.zoneId === dripZone);
    expect(drip.series.slice(0, 2).map((p: { litres: number; basis: string }) => [p.litres, p.basis])).toEqual([[400, 'estimated'], [120, 'estimated']]);
    expect(drip.series[0].appliedMm).toBe(8);
    // The site: every zone together, over the area of both.
    expect(res.body.site.areaM2).toBe(150);
    expect(res.body.totals.litres).toBeCloseTo(550 + 285.5 + 400 + 120, 1);
    expect(res.body.series[0].appliedMm).toBeCloseTo(950 / 150, 2);
  });

  it('sets plant demand (ET₀ × plant coefficient) and rain per day from the weather', async () => {
    const res = await agent.owner.get(`/api/history/water-use?siteId=${f.siteA}&zoneId=${f.zoneA}&from=2025-07-01&to=2025-07-04`);
    expect(res.status).toBe(200);
    const kc = plantCoefficient('cool_season_turf', 7, 40);
    expect(res.body.series.map((p: { demandMm: number }) => p.demandMm)).toEqual([6, 5.5, 4, 6.2].map((e) => Math.round(e * kc * 100) / 100));
    expect(res.body.series[2]).toMatchObject({ rainMm: 12, effectiveRainMm: 7.2, weatherDays: 1 });
    expect(res.body.zones).toHaveLength(1);
  });

  it('compares month with month', async () => {
    const res = await agent.manager.get(`/api/history/water-use?siteId=${f.siteA}&from=2025-06-01&to=2025-07-31&bucket=month`);
    expect(res.status).toBe(200);
    const [june, july] = res.body.series;
    expect(june).toMatchObject({ period: '2025-06-01', periodEnd: '2025-06-30', litres: 600 + 600, previousLitres: 0, changePct: null });
    expect(july).toMatchObject({ period: '2025-07-01', litres: 1355.5, previousLitres: 1200 });
    expect(july.changePct).toBeCloseTo(((1355.5 - 1200) / 1200) * 100, 1);
  });

  it('answers 404 for a site the person may not see, and 400 for a bad range', async () => {
    expect((await agent.owner.get(`/api/history/water-use?siteId=${f.siteB}`)).status).toBe(404);
    expect((await agent.manager.get(`/api/history/water-use?siteId=${f.siteA}&from=2025-07-05&to=2025-07-01`)).status).toBe(400);
    expect((await agent.manager.get(`/api/history/water-use?siteId=${f.siteA}&from=2020-01-01&to=2025-07-01`)).status).toBe(400);
    expect((await agent.manager.get(`/api/history/water-use?siteId=${f.siteA}&bucket=year`)).status).toBe(400);
  });
});

describe('run history', () => {
  it('lists planned against actual minutes, litres labelled measured or estimated, and the reason', async () => {
    const res = await agent.manager.get(`/api/history/zone-runs?siteId=${f.siteA}&from=2025-07-01&to=2025-07-04&sort=plannedStart&order=asc&pageSize=50`);
    expect(res.status).toBe(200);
    expect(res.body.total).toBe(8);
    expect(res.body.totalIsExact).toBe(true);
    const first = res.body.items[0];
    expect(first).toMatchObject({
      zoneId: f.zoneA, zoneName: 'Zone A1', siteName: 'Test Site A', programId, programName: 'Early mornings', runKind: 'program',
      localDate: '2025-07-01', plannedMinutes: 10, actualMinutes: 10, litres: 310, litresBasis: 'measured', state: 'completed', reason: null,
    });
    const overlap = res.body.items[1];
    expect(overlap).toMatchObject({ cycle: 1, actualMinutes: 8, litres: 240, litresBasis: 'estimated', measuredLitres: null });
    const skipped = res.body.items.find((r: { state: string }) => r.state === 'skipped_restriction');
    expect(skipped).toMatchObject({ actualMinutes: null, litres: 0, reason: 'No watering on Thursdays at this site' });
  });

  it('filters by zone, program or manual, state and local date, and pages on the server', async () => {
    expect((await allPages('manager', `zoneId=${dripZone}`)).length).toBe(4);
    expect((await allPages('manager', `siteId=${f.siteA}&programId=manual`)).length).toBe(2);
    expect((await allPages('manager', `siteId=${f.siteA}&programId=${programId}`)).length).toBe(8);
    expect((await allPages('manager', `state=held_rain,skipped_restriction`)).length).toBe(2);
    // 1 July in Denver includes the run at 04:30 UTC on the 2nd.
    const day = await allPages('manager', `siteId=${f.siteA}&from=2025-07-01&to=2025-07-01`);
    expect(day.length).toBe(4);
    const page2 = await agent.manager.get(`/api/history/zone-runs?siteId=${f.siteA}&sort=litres&order=desc&page=2&pageSize=2`);
    expect(page2.body.items.map((r: { litres: number }) => r.litres)).toEqual([310, 300]);
  });

  it('shows an owner only the sites they belong to', async () => {
    const rows = (await allPages('owner', 'from=2025-06-01&to=2025-07-31')) as unknown as { siteId: number }[];
    expect(rows.length).toBeGreaterThan(0);
    expect(rows.every((r) => r.siteId === f.siteA)).toBe(true);
    expect((await agent.owner.get(`/api/history/zone-runs?siteId=${f.siteB}`)).status).toBe(404);
    expect((await agent.technician.get(`/api/history/zone-runs?zoneId=${f.zoneB}`)).status).toBe(404);
    const mgr = (await allPages('manager', 'from=2025-06-01&to=2025-07-31')) as unknown as { siteId: number }[];
    expect(mgr.some((r) => r.siteId === f.siteB)).toBe(true);
  });

  it('exports to CSV exactly the rows of the table’s filter, in its order', async () => {
    const filter = `siteId=${f.siteA}&from=2025-06-01&to=2025-07-04&state=completed,stopped&sort=litres&order=desc`;
    const table = await allPages('manager', filter);
    const res = await agent.manager.get(`/api/history/zone-runs.csv?${filter}`);
    expect(res.status).toBe(200);
    expect(res.headers['content-type']).toMatch(/text\/csv/);
    expect(res.headers['content-disposition']).toMatch(/attachment; filename="?runnel-zone-runs\.csv"?/);
    const rows = parseCsv(res.text, { columns: true }) as Record<string, string>[];
    expect(rows.map((r) => Number(r.zone_run_id))).toEqual(table.map((r) => r.id));
    expect(rows.every((r) => r.state === 'completed' || r.state === 'stopped')).toBe(true);
    const stopped = rows.find((r) => r.state === 'stopped')!;
    expect(stopped).toMatchObject({ zone: 'Drip beds', program: 'Early mornings', reason: 'Stopped by a user', litres_basis: 'estimated', litres: '120' });
    const owner = await agent.owner.get(`/api/history/zone-runs.csv?siteId=${f.siteB}`);
    expect(owner.status).toBe(404);
  });

  it('refuses unknown states, sorts and programs', async () => {
    expect((await agent.manager.get('/api/history/zone-runs?state=exploded')).status).toBe(400);
    expect((await agent.manager.get('/api/history/zone-runs?sort=password')).status).toBe(400);
    expect((await agent.manager.get('/api/history/zone-runs?programId=some')).status).toBe(400);
    expect((await agent.manager.get('/api/history/zone-runs?pageSize=5000')).status).toBe(400);
  });
});

describe('sensor history', () => {
  it('downsamples readings into time buckets with mean, lowest and highest, and adds valve marks', async () => {
    // Ten days of one reading a minute: 14,400 rows.
    await tdb.db.execute(sql`
      insert into readings (controller_id, at, board_at, received_at, seq, rain, moisture_raw, moisture_pct, supply_v, flow_lpm, rssi)
      select ${f.controllerA}, t, t, t, extract(epoch from t)::bigint, false, 2000, 20 + 10 * sin(extract(epoch from t) / 3600.0), 24 + (extract(minute from t)::int % 3) * 0.1,
        case when extract(hour from t) = 5 then 30 else 0 end, -60
      from generate_series('2025-07-01T00:00:00Z'::timestamptz, '2025-07-10T23:59:00Z'::timestamptz, interval '1 minute') t`);
    await tdb.db.execute(sql`insert into valve_events (controller_id, zone_id, relay, open, source, at) values
      (${f.controllerA}, ${f.zoneA}, 1, true, 'command', '2025-07-03T05:00:00Z'), (${f.controllerA}, ${f.zoneA}, 1, false, 'command', '2025-07-03T05:10:00Z')`);
    await recomputeHours(tdb.db, f.controllerA, Date.parse('2025-07-01T00:00:00Z'), Date.parse('2025-07-11T00:00:00Z'));
    const res = await agent.owner.get(`/api/controllers/${f.controllerA}/readings?from=2025-07-01T00:00:00Z&to=2025-07-11T00:00:00Z&points=100`);
    expect(res.status).toBe(200);
    expect(res.body.bucketMs).toBe(10_800_000); // 2.4 h rounded up to whole hours
    expect(res.body.series.length).toBe(80);
    expect(res.body.series.reduce((t: number, b: { n: number }) => t + b.n, 0)).toBe(14_400);
    for (const b of res.body.series) {
      expect(b.moistureMin).toBeLessThanOrEqual(b.moistureAvg);
      expect(b.moistureAvg).toBeLessThanOrEqual(b.moistureMax);
      expect(b.supplyVMin).toBeGreaterThanOrEqual(24);
      expect(b.supplyVMax).toBeLessThanOrEqual(24.2 + 1e-6);
    }
    expect(res.body.series[0].at).toBe('2025-07-01T00:00:00.000Z');
    expect(res.body.valveEvents).toEqual([
      { at: '2025-07-03T05:00:00.000Z', relay: 1, zoneId: f.zoneA, open: true, source: 'command' },
      { at: '2025-07-03T05:10:00.000Z', relay: 1, zoneId: f.zoneA, open: false, source: 'command' },
    ]);
    // The hourly rollup gives what the readings give.
    const raw = await tdb.db.execute<Record<string, number>>(sql`
      select count(*)::int as n, avg(moisture_pct) as m_avg, min(moisture_pct) as m_min, max(moisture_pct) as m_max, avg(flow_lpm) as f_avg, max(flow_lpm) as f_max
      from readings where controller_id = ${f.controllerA} and at >= '2025-07-01T00:00:00Z' and at < '2025-07-11T00:00:00Z'
      group by date_bin('3 hours', at, '2025-07-01T00:00:00Z') order by date_bin('3 hours', at, '2025-07-01T00:00:00Z')`);
    expect(res.body.series.map((b: { n: number; moistureMin: number; moistureMax: number; flowMax: number }) => [b.n, b.moistureMin, b.moistureMax, b.flowMax]))
      .toEqual(raw.rows.map((r) => [r.n, Math.round(Number(r.m_min) * 10) / 10, Math.round(Number(r.m_max) * 10) / 10, Math.round(Number(r.f_max) * 100) / 100]));
    res.body.series.forEach((b: { moistureAvg: number; flowAvg: number }, i: number) => {
      expect(b.moistureAvg).toBeCloseTo(Number(raw.rows[i].m_avg), 1);
      expect(b.flowAvg).toBeCloseTo(Number(raw.rows[i].f_avg), 2);
    });
    // Short ranges come straight from the readings, bucket by bucket.
    const short = await agent.owner.get(`/api/controllers/${f.controllerA}/readings?from=2025-07-03T04:30:00Z&to=2025-07-03T06:30:00Z&points=120`);
    expect(short.body.bucketMs).toBe(60_000);
    expect(short.body.series).toHaveLength(120);
    expect(short.body.series.filter((b: { flowAvg: number }) => b.flowAvg === 30)).toHaveLength(60);
    expect((await agent.owner.get(`/api/controllers/${f.controllerB}/readings`)).status).toBe(404);
    expect((await agent.owner.get(`/api/controllers/${f.controllerA}/readings?points=1`)).status).toBe(400);
  });
});

describe('the daily rollup', () => {
  it('keeps the daily rollup current as zone runs end (the zone_run event)', async () => {
    const bus = new LiveBus();
    const keeper = new RollupKeeper({ db: tdb.db, bus, clock: realClock, log: pino({ level: 'silent' }) });
    keeper.start();
    await keeper.idle();
    const zr = await addRun({ zoneId: f.zoneA, controllerId: f.controllerA, siteId: f.siteA, flowLpm: 30, start: '2025-07-04T12:00:00Z', minutes: 5, measured: 149 });
    bus.publish({ type: 'zone_run', siteId: f.siteA, runId: zr.runId, zoneId: f.zoneA, zoneRunId: zr.id, state: 'completed', reason: null });
    await keeper.idle();
    const r = await tdb.db.execute(sql`select litres, measured_litres, not_as_planned from water_use_daily where zone_id = ${f.zoneA} and date = '2025-07-04'`);
    expect(r.rows[0]).toEqual({ litres: 149, measured_litres: 149, not_as_planned: 1 });
    await keeper.stop();
  });

  it('counts zone runs written already held when their run was planned, once the run ends (the run event)', async () => {
    const bus = new LiveBus();
    const keeper = new RollupKeeper({ db: tdb.db, bus, clock: realClock, log: pino({ level: 'silent' }) });
    keeper.start();
    await keeper.idle();
    const day = `select litres, not_as_planned from water_use_daily where zone_id = ${f.zoneA} and date = '2025-07-09'`;
    const zr = await addRun({ zoneId: f.zoneA, controllerId: f.controllerA, siteId: f.siteA, flowLpm: 30, start: '2025-07-09T12:00:00Z', minutes: 5, actual: null, state: 'held_rain', reason: 'Raining at the site' });
    // the zone run alone tells nobody: no row for the day yet
    expect((await tdb.db.execute(sql.raw(day))).rows).toEqual([]);
    bus.publish({ type: 'run', siteId: f.siteA, runId: zr.runId, state: 'held_rain', reason: 'Raining at the site' });
    await keeper.idle();
    expect((await tdb.db.execute(sql.raw(day))).rows).toEqual([{ litres: 0, not_as_planned: 1 }]);
    // a run still going changes nothing yet
    const zr2 = await addRun({ zoneId: f.zoneA, controllerId: f.controllerA, siteId: f.siteA, flowLpm: 30, start: '2025-07-09T14:00:00Z', minutes: 5, actual: null, state: 'skipped_restriction', reason: 'No watering on Wednesdays' });
    bus.publish({ type: 'run', siteId: f.siteA, runId: zr2.runId, state: 'running', reason: null });
    await keeper.idle();
    expect((await tdb.db.execute(sql.raw(day))).rows).toEqual([{ litres: 0, not_as_planned: 1 }]);
    bus.publish({ type: 'run', siteId: f.siteA, runId: zr2.runId, state: 'skipped_restriction', reason: 'No watering on Wednesdays' });
    await keeper.idle();
    expect((await tdb.db.execute(sql.raw(day))).rows).toEqual([{ litres: 0, not_as_planned: 2 }]);
    await keeper.stop();
  });

  it('keeps the hourly readings rollup current in each batch of the reading writer, including a replayed hour', async () => {
    const writer = new ReadingWriter(tdb.pool, pino({ level: 'silent' }), realClock, { batchRows: 100, flushMs: 10, maxBufferedRows: 1000 });
    const message = (seq: number, readings: [string, number, number, number | null][]) => {
      const hours: HourSums[] = [];
      let text = '';
      for (const [at, moisturePct, supplyV, flowLpm] of readings) {
        const v = { rain: false, moistureRaw: 2000, moisturePct, supplyV, flowLpm, rssi: -60 };
        text += copyLine(f.controllerB, at, at, new Date().toISOString(), seq, v);
        addToHour(hours, Date.parse(at), v);
      }
      return writer.writeText(f.controllerB, seq, text, readings.length, hours);
    };
    const hourly = async () =>
      (await tdb.db.execute(sql`select to_char(hour at time zone 'UTC', 'HH24:MI') as h, n, moisture_sum, moisture_min, moisture_max, supply_min, supply_max, flow_n, flow_sum, flow_max
        from readings_hourly where controller_id = ${f.controllerB} and hour >= '2025-08-01' and hour < '2025-08-02' order by hour`)).rows;
    // one message spanning an hour boundary, then a later one in its own batch
    await message(1, [['2025-08-01T10:15:00.000Z', 30, 24, 2], ['2025-08-01T10:45:00.000Z', 40, 25, null], ['2025-08-01T11:05:00.000Z', 20, 23, 4]]);
    expect(await hourly()).toEqual([
      { h: '10:00', n: 2, moisture_sum: 70, moisture_min: 30, moisture_max: 40, supply_min: 24, supply_max: 25, flow_n: 1, flow_sum: 2, flow_max: 2 },
      { h: '11:00', n: 1, moisture_sum: 20, moisture_min: 20, moisture_max: 20, supply_min: 23, supply_max: 23, flow_n: 1, flow_sum: 4, flow_max: 4 },
    ]);
    await message(2, [['2025-08-01T11:35:00.000Z', 25, 22.5, 6]]);
    // a board replaying its offline buffer: an older hour gets more readings, and one with no flow yet gets its first
    await Promise.all([message(3, [['2025-08-01T09:50:00.000Z', 35, 24, null]]), message(4, [['2025-08-01T10:20:00.000Z', 50, 24.5, 1], ['2025-08-01T09:55:00.000Z', 10, 24, 3]])]);
    expect(await hourly()).toEqual([
      { h: '09:00', n: 2, moisture_sum: 45, moisture_min: 10, moisture_max: 35, supply_min: 24, supply_max: 24, flow_n: 1, flow_sum: 3, flow_max: 3 },
      { h: '10:00', n: 3, moisture_sum: 120, moisture_min: 30, moisture_max: 50, supply_min: 24, supply_max: 25, flow_n: 2, flow_sum: 3, flow_max: 2 },
      { h: '11:00', n: 2, moisture_sum: 45, moisture_min: 20, moisture_max: 25, supply_min: 22.5, supply_max: 23, flow_n: 2, flow_sum: 10, flow_max: 6 },
    ]);
    // what the batches merged is what a recompute from the stored readings gives
    const merged = await hourly();
    await recomputeHours(tdb.db, f.controllerB, Date.parse('2025-08-01T00:00:00Z'), Date.parse('2025-08-02T00:00:00Z'));
    expect(await hourly()).toEqual(merged);
    await writer.close();
  });
});
