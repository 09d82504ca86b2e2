import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import mqtt from 'mqtt';
import request from 'supertest';
import { sql } from 'drizzle-orm';
import WebSocket from 'ws';
import { topicFor } from '../../server/contracts/protocol';
import { startSimulator } from '../../simulator/fleet';
import { liveClient, sessionCookie, startLiveWorld, until, type LiveWorld } from '../helpers/live';

let w: LiveWorld;
beforeAll(async () => {
  w = await startLiveWorld();
});
afterAll(async () => {
  await w?.close();
});

const rowCounts = async () =>
  JSON.stringify(
    (await w.tdb.db.execute(sql`select (select count(*) from readings) r, (select count(*) from valve_events) v, (select count(*) from sites) s,
      (select count(*) from zones) z, (select count(*) from controllers) c, (select count(*) from programs) p, (select count(*) from commands) k`)).rows[0],
  );

/** A valid message of each kind, and ways to break it that the zod schemas must catch. */
const validTelemetry = () => ({ v: 1, seq: 10, at: new Date().toISOString(), samples: [{ at: new Date().toISOString(), rain: false, moistureRaw: 1800, moisturePct: 31, supplyV: 25, flowLpm: 0, rssi: -60 }] });
/** The same as columns; its flow column is null (no sensor), so no mutation can make a null there valid. */
const validColumns = () => ({ t0: new Date().toISOString(), dtMs: [0], rain: [false], moistureRaw: [1800], moisturePct: [31], supplyV: [25], flowLpm: null, rssi: [-60] });
const validColumnar = () => ({ v: 1, seq: 10, at: new Date().toISOString(), columns: validColumns() });
const validEvent = () => ({ v: 1, seq: 11, at: new Date().toISOString(), kind: 'relay', relay: 1, open: true, source: 'button', cmdId: null });
const wrongValue = fc.oneof(fc.constant(null), fc.string(), fc.integer({ min: -1e9, max: 1e9 }), fc.double(), fc.boolean(), fc.constant([]), fc.constant({}));

/** A value that can never pass where `v` is expected: another type altogether. */
function wrongFor(v: unknown): fc.Arbitrary<unknown> {
  if (typeof v === 'boolean') return fc.oneof(fc.string(), fc.integer(), fc.constant({}));
  if (typeof v === 'number') return fc.oneof(fc.string(), fc.boolean(), fc.constant({}), fc.constant([1]));
  if (typeof v === 'string') return fc.oneof(fc.integer(), fc.boolean(), fc.constant({}), fc.constant(null));
  if (v === null) return fc.oneof(fc.integer(), fc.boolean(), fc.constant([]));
  return fc.oneof(fc.string(), fc.integer(), fc.constant(null));
}

function mutate(base: Record<string, unknown>): fc.Arbitrary<unknown> {
  const keys = Object.keys(base);
  return fc.oneof(
    // a field of the wrong type
    fc.constantFrom(...keys).chain((k) => wrongFor(base[k]).map((val) => ({ ...base, [k]: val }))),
    // a required field missing
    fc.constantFrom(...keys).map((k) => {
      const c = { ...base };
      delete c[k];
      return c;
    }),
    // an unknown field
    fc.record({ extra: fc.string({ minLength: 1, maxLength: 8 }).filter((s) => !keys.includes(s)), val: wrongValue }).map(({ extra, val }) => ({ ...base, [extra]: val })),
    // not an object at all
    fc.oneof(fc.string(), fc.integer(), fc.constant(null), fc.array(fc.integer())),
  );
}

describe('10,000 malformed MQTT messages', () => {
  it('are each dropped and counted with a reason, crash nothing and write no row', async () => {
    const b = w.boards.find((x) => x.serial === 'TEST-A-0001')!;
    const client = await mqtt.connectAsync(w.rt.mqttUrl!, { clientId: b.serial, username: b.serial, password: b.secret, reconnectPeriod: 0 });
    const stats = w.rt.gateway.stats;
    const dropped0 = stats.dropped.malformed + stats.dropped.oversized;
    const before = await rowCounts();
    // sample objects, and columns broken outside and inside
    const tele = [
      ...fc.sample(mutate(validTelemetry()), 2000),
      ...fc.sample(mutate(validColumnar()), 1000),
      ...fc.sample(mutate(validColumns()), 1000).map((columns) => ({ ...validColumnar(), columns })),
    ];
    const ev = fc.sample(mutate(validEvent()), 4000);
    const junk = fc.sample(fc.uint8Array({ minLength: 0, maxLength: 64 }), 1990).map((u) => Buffer.from(u));
    const huge = Array.from({ length: 10 }, () => Buffer.alloc(20_000, 0x20));
    // a string that happens to be valid JSON of a valid message must not be sampled as "malformed"
    const isValid = (m: unknown) => [validTelemetry(), validColumnar(), validEvent()].some((x) => JSON.stringify(m) === JSON.stringify(x));
    const msgs: [string, Buffer][] = [
      ...tele.filter((m) => !isValid(m)).map((m) => [topicFor(b.serial, 'telemetry'), Buffer.from(JSON.stringify(m) ?? 'x')] as [string, Buffer]),
      ...ev.filter((m) => !isValid(m)).map((m) => [topicFor(b.serial, 'event'), Buffer.from(JSON.stringify(m) ?? 'x')] as [string, Buffer]),
      ...junk.map((u) => [topicFor(b.serial, 'telemetry'), Buffer.concat([Buffer.from('{'), u])] as [string, Buffer]),
      ...huge.map((h) => [topicFor(b.serial, 'ack'), h] as [string, Buffer]),
    ];
    while (msgs.length < 10_000) msgs.push([topicFor(b.serial, 'state'), Buffer.from(`{"v":1,"seq":"${msgs.length}"}`)]);
    for (let i = 0; i < msgs.length; i += 200) await Promise.all(msgs.slice(i, i + 200).map(([t, p]) => client.publishAsync(t, p, { qos: 1 })));
    expect(msgs).toHaveLength(10_000);
    expect(stats.dropped.malformed + stats.dropped.oversized - dropped0).toBe(10_000);
    expect(stats.dropped.oversized).toBeGreaterThanOrEqual(10);
    expect(await rowCounts()).toBe(before);
    expect((await fetch(`${w.rt.url}/api/health`)).status).toBe(200);
    await client.endAsync();
  });
});

describe('10,000 malformed HTTP requests', () => {
  it('are each refused with a 4xx and a reason, crash nothing and write no row', async () => {
    const cookie = await sessionCookie(w.rt.url, w.f.users.admin.email);
    const f = w.f;
    const bases: [string, string, Record<string, unknown>][] = [
      ['post', '/api/sites', { name: 'S', timezone: 'UTC', latitude: 1, longitude: 1, supplyFlowLpm: 10, staticPressureKPa: 300 }],
      ['post', '/api/zones', { controllerId: f.controllerA, relay: 5, name: 'Z', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip', headCount: 3, flowPerHeadLpm: 1, areaM2: 5, rootDepthM: 0.3 }],
      ['patch', `/api/zones/${f.zoneA}`, { headCount: 5 }],
      ['post', '/api/controllers', { siteId: f.siteA, serial: 'FUZZ-0001', name: 'B', relayCount: 4 }],
      ['post', `/api/sites/${f.siteA}/programs`, { name: 'P', startTimes: ['05:00'], dayRule: { kind: 'odd' }, zones: [{ zoneId: f.zoneA, minutes: 5 }] }],
      ['post', `/api/zones/${f.zoneA}/start`, { minutes: 5 }],
      ['post', `/api/sites/${f.siteA}/rain-delay`, { hours: 2 }],
      ['post', '/api/auth/sign-in', { email: 'a@b.test', password: 'x' }],
    ];
    const before = await rowCounts();
    const reasons = new Map<string, number>();
    let n = 0;
    const agent = request.agent(w.rt.url);
    for (const [method, path, base] of bases) {
      // a fixed seed: the same 10,000 requests every run (a random draw once in a while mutated a body into a valid one)
      const bodies = fc.sample(mutate(base), { numRuns: 1250, seed: 20261202 });
      for (let i = 0; i < bodies.length; i += 50) {
        const res = await Promise.all(
          bodies.slice(i, i + 50).map((body) => {
            const r = (agent as unknown as Record<string, (p: string) => request.Test>)[method](path).set('cookie', cookie).set('content-type', 'application/json');
            return r.send(JSON.stringify(body) ?? 'null');
          }),
        );
        for (const r of res) {
          n++;
          // some mutations are still valid (e.g. a changed name): those may succeed, but none may crash
          expect(r.status).toBeLessThan(500);
          if (r.status >= 400) reasons.set(r.body?.error?.code ?? 'none', (reasons.get(r.body?.error?.code ?? 'none') ?? 0) + 1);
        }
      }
    }
    expect(n).toBe(10_000);
    const refused = [...reasons.values()].reduce((a, b) => a + b, 0);
    // every mutation breaks the schema (wrong type, missing or unknown field, not an object)
    expect(refused).toBe(10_000);
    expect(reasons.get('none') ?? 0).toBe(0);
    expect([...reasons.keys()]).toContain('validation_failed');
    expect(await rowCounts()).toBe(before);
    expect((await fetch(`${w.rt.url}/api/health`)).status).toBe(200);
  }, 180_000);
});

describe('a slow WebSocket client', () => {
  it('is skipped and resynced while a quick one keeps getting events at once', async () => {
    const cookie = await sessionCookie(w.rt.url, w.f.users.manager.email);
    const quick = await liveClient(w.rt.url, cookie);
    await quick.waitFor((m) => m.type === 'snapshot');
    const slow = new WebSocket(`${w.rt.url.replace('http', 'ws')}/ws`, { headers: { cookie, origin: w.rt.url } });
    await new Promise((r) => slow.once('open', r));
    (slow as unknown as { _socket: { pause: () => void } })._socket.pause(); // stops reading: the server's send buffer fills
    const pad = 'x'.repeat(2000);
    // 8 MB of events in small bursts: the quick client drains between them, the slow one cannot
    for (let i = 0; i < 4000; i++) {
      w.rt.services.bus.publish({ type: 'reading', siteId: w.f.siteA, controllerId: w.f.controllerA, at: new Date().toISOString(), rain: false, moisturePct: 30, supplyV: 25, flowLpm: 0, rssi: -60, pad, i });
      if (i % 20 === 19) await sleep(2);
    }
    const t0 = Date.now();
    w.rt.services.bus.publish({ type: 'marker', siteId: w.f.siteA });
    await quick.waitFor((m) => m.type === 'marker', 5000);
    const quickLatency = Date.now() - t0;
    expect(w.rt.hub.stats.dropped).toBeGreaterThan(0);
    expect(quickLatency).toBeLessThan(2000);
    // reading again, the slow client gets a fresh snapshot after the next event
    const got: string[] = [];
    slow.on('message', (d) => got.push(JSON.parse(String(d)).type));
    (slow as unknown as { _socket: { resume: () => void } })._socket.resume();
    await until(() => w.rt.hub.stats.resyncs > 0 || (w.rt.services.bus.publish({ type: 'marker', siteId: w.f.siteA }), false), 10_000, 100);
    await until(() => got.includes('snapshot'), 10_000);
    quick.close();
    slow.close();
  }, 60_000);
});

describe('a board whose clock is hours wrong', () => {
  it('has its readings stored at sane server times, with its own times kept beside them', async () => {
    const sim = await startSimulator({ brokerUrl: w.rt.mqttUrl!, boards: w.boards.filter((b) => b.serial === 'TEST-B-0001'), seed: 31, sampleIntervalMs: 100, samplesPerMessage: 2, reconnectPeriodMs: 200 });
    await sim.ready();
    const b = sim.board('TEST-B-0001');
    b.setFault({ fault: 'clock_skew', on: true, offsetMinutes: 240 });
    b.setFault({ fault: 'offline', on: true });
    await sleep(300);
    b.setFault({ fault: 'offline', on: false });
    await until(() => b.online, 10_000);
    await sleep(1500);
    b.pressButton(1, true);
    await sleep(500);
    await w.rt.writer.flush();
    const r = await w.tdb.db.execute(sql`select extract(epoch from (now() - at)) as age, extract(epoch from (board_at - at)) as skew from readings
      where controller_id = ${w.f.controllerB} order by received_at desc limit 5`);
    for (const row of r.rows) {
      expect(Math.abs(Number(row.age))).toBeLessThan(60);
      expect(Number(row.skew)).toBeGreaterThan(239 * 60);
    }
    const ev = await until(async () => (await w.tdb.db.execute(sql`select extract(epoch from (now() - at)) as age, extract(epoch from (board_at - at)) as skew from valve_events where controller_id = ${w.f.controllerB} and source = 'button'`)).rows[0]);
    expect(Math.abs(Number(ev.age))).toBeLessThan(60);
    expect(Number(ev.skew)).toBeGreaterThan(239 * 60);
    b.pressButton(1, false);
    await sim.close();
  });
});

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
