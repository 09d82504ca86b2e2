import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import mqtt, { type MqttClient } from 'mqtt';
import { randomUUID } from 'node:crypto';
import { sql } from 'drizzle-orm';
import { topicFor } from '../../server/contracts/protocol';
import { startLiveWorld, until, type LiveWorld } from '../helpers/live';

let w: LiveWorld;
const clients: MqttClient[] = [];

beforeAll(async () => {
  w = await startLiveWorld();
});
afterAll(async () => {
  for (const c of clients) c.end(true);
  await w.close();
});

function connect(clientId: string, username: string | undefined, password: string | undefined) {
  const c = mqtt.connect(w.rt.mqttUrl!, { clientId, username, password, reconnectPeriod: 0, connectTimeout: 3000 });
  clients.push(c);
  return new Promise<MqttClient>((ok, fail) => {
    c.once('connect', () => ok(c));
    c.once('error', (e) => fail(e));
    c.once('close', () => fail(new Error('closed')));
  });
}
const boardA = () => w.boards.find((b) => b.serial === 'TEST-A-0001')!;
const boardB = () => w.boards.find((b) => b.serial === 'TEST-B-0001')!;
const readingsOf = async (serial: string) =>
  (await w.tdb.db.execute(sql`select count(*)::int as n from readings r join controllers c on c.id = r.controller_id where c.serial = ${serial}`)).rows[0].n as number;

const sample = (at = new Date()) => ({ at: at.toISOString(), rain: false, moistureRaw: 1800, moisturePct: 31.5, supplyV: 25.1, flowLpm: 0, rssi: -61 });
const telemetry = (seq: number, n = 3) => JSON.stringify({ v: 1, seq, at: new Date().toISOString(), samples: Array.from({ length: n }, () => sample()) });

describe('board credentials', () => {
  it('refuses a wrong secret', async () => {
    await expect(connect(boardA().serial, boardA().serial, 'not-the-secret')).rejects.toThrow(/Bad username or password|Not authorized|closed/i);
  });
  it('refuses a missing password', async () => {
    await expect(connect(boardA().serial, boardA().serial, undefined)).rejects.toThrow();
  });
  it('refuses a user name that is not the client id', async () => {
    await expect(connect(boardA().serial, boardB().serial, boardB().secret)).rejects.toThrow();
  });
  it('refuses an unknown serial', async () => {
    await expect(connect('NOPE-0001', 'NOPE-0001', 'whatever')).rejects.toThrow();
  });
  it('accepts the right secret and marks the controller online', async () => {
    const c = await connect(boardA().serial, boardA().serial, boardA().secret);
    await c.publishAsync(topicFor(boardA().serial, 'status'), JSON.stringify({ v: 1, online: true, firmware: '2.0.0', at: new Date().toISOString() }), { qos: 1, retain: true });
    const r = await w.tdb.db.execute(sql`select online, firmware_version from controllers where serial = ${boardA().serial}`);
    expect(r.rows[0]).toEqual({ online: true, firmware_version: '2.0.0' });
    c.end(true);
  });
});

describe('topic ACL', () => {
  it('does not let board A subscribe to board B’s commands or to $SYS', async () => {
    const a = await connect(boardA().serial, boardA().serial, boardA().secret);
    const granted = await new Promise<number[]>((ok) =>
      a.subscribe([topicFor(boardB().serial, 'cmd'), '$SYS/#', topicFor(boardA().serial, 'cmd')], { qos: 1 }, (err, g) => {
        // mqtt.js reports refused subscriptions as an error carrying the SUBACK
        const packet = (err as unknown as { packet?: { granted: number[] } })?.packet;
        ok(packet?.granted ?? (g ?? []).map((x) => x.qos));
      }),
    );
    expect(granted).toEqual([128, 128, 1]);
    a.end(true);
  });

  it('does not let board A publish under board B’s topics', async () => {
    const before = await readingsOf(boardB().serial);
    const a = await connect(boardA().serial, boardA().serial, boardA().secret);
    const closed = new Promise<void>((r) => a.once('close', () => r()));
    a.publish(topicFor(boardB().serial, 'telemetry'), telemetry(1), { qos: 1 });
    await closed; // the broker drops a board that breaks its ACL
    expect(await readingsOf(boardB().serial)).toBe(before);
    expect(w.rt.gateway.stats.dropped.acl_publish).toBeGreaterThan(0);
  });
});

describe('many messages at once', () => {
  it('delivers twenty thousand commands published in one moment without overflowing the broker', async () => {
    const close = () => ({ v: 1 as const, id: randomUUID(), op: 'close' as const, relay: 1, at: new Date().toISOString() });
    const sends: Promise<void>[] = [];
    // (a load check: the stack overflow this guards against was seen in the schedule benchmark,
    // where 10,000 zones start in one second; this test does not recreate its exact timing)
    for (let i = 0; i < 200; i++) sends.push(w.rt.gateway.send(boardA().serial, close()));
    for (let i = 0; i < 20_000; i++) sends.push(w.rt.gateway.send('TEST-Z-0404', close()));
    await Promise.all(sends);
    expect(w.rt.gateway.stats.commandsSent).toBeGreaterThanOrEqual(20_200);
    expect((await fetch(`${w.rt.url}/api/health`)).status).toBe(200);
  });
});

describe('message handling', () => {
  it('counts and drops malformed and oversized payloads without crashing, then stores a good one', async () => {
    const stats = w.rt.gateway.stats;
    const malformed0 = stats.dropped.malformed;
    const oversized0 = stats.dropped.oversized;
    const b = await connect(boardB().serial, boardB().serial, boardB().secret);
    const t = topicFor(boardB().serial, 'telemetry');
    await b.publishAsync(t, 'not json at all', { qos: 1 });
    await b.publishAsync(t, JSON.stringify({ v: 1, seq: 'x', at: 'yesterday', samples: [] }), { qos: 1 });
    await b.publishAsync(t, JSON.stringify({ v: 2, seq: 5, at: new Date().toISOString(), samples: [sample()] }), { qos: 1 });
    await b.publishAsync(topicFor(boardB().serial, 'event'), JSON.stringify({ v: 1, seq: 6, at: new Date().toISOString(), kind: 'relay', relay: 12, open: true, source: 'button', cmdId: null }), { qos: 1 });
    await b.publishAsync(t, Buffer.alloc(20_000, 0x7b), { qos: 1 });
    // a board whose clock was never set: year 0 is no time PostgreSQL stores, and must not reach a batch
    await b.publishAsync(t, JSON.stringify({ v: 1, seq: 7, at: new Date().toISOString(), samples: [{ ...sample(), at: '0000-01-01T00:00:00Z' }] }), { qos: 1 });
    expect(stats.dropped.malformed - malformed0).toBe(5);
    expect(stats.dropped.oversized - oversized0).toBe(1);
    const before = await readingsOf(boardB().serial);
    await b.publishAsync(t, telemetry(100, 4), { qos: 1 });
    expect(await readingsOf(boardB().serial)).toBe(before + 4);
    b.end(true);
  });

  it('drops a duplicate sequence number and counts a gap', async () => {
    const stats = w.rt.gateway.stats;
    const dup0 = stats.dropped.duplicate;
    const gaps0 = stats.gaps;
    const b = await connect(boardB().serial, boardB().serial, boardB().secret);
    const t = topicFor(boardB().serial, 'telemetry');
    const before = await readingsOf(boardB().serial);
    await b.publishAsync(t, telemetry(200, 2), { qos: 1 });
    await b.publishAsync(t, telemetry(200, 2), { qos: 1 });
    await b.publishAsync(t, telemetry(205, 2), { qos: 1 });
    expect(await readingsOf(boardB().serial)).toBe(before + 4);
    expect(stats.dropped.duplicate - dup0).toBe(1);
    expect(stats.gaps - gaps0).toBe(4 + 99); // 101…199 after seq 100, then 201…204
    // a relay state takes a number from the same counter: the reading after it is no gap
    const states = topicFor(boardB().serial, 'state');
    await b.publishAsync(states, JSON.stringify({ v: 1, seq: 206, at: new Date().toISOString(), relays: [{ open: false, since: null, closesAt: null, cmdId: null }] }), { qos: 1, retain: true });
    await b.publishAsync(t, telemetry(207, 1), { qos: 1 });
    expect(await readingsOf(boardB().serial)).toBe(before + 5);
    expect(stats.gaps - gaps0).toBe(4 + 99);
    const r = await w.tdb.db.execute(sql`select last_seq from controllers where serial = ${boardB().serial}`);
    expect(Number(r.rows[0].last_seq)).toBe(207);
    b.end(true);
  });

  it('stores a columnar telemetry message as the same rows as sample objects, and refuses columns that disagree', async () => {
    const stats = w.rt.gateway.stats;
    const a = await connect(boardA().serial, boardA().serial, boardA().secret);
    const t = topicFor(boardA().serial, 'telemetry');
    const t0 = Math.floor(Date.now() / 1000) * 1000 - 20_000;
    const values = [
      { rain: false, moistureRaw: 1790, moisturePct: 30.25, supplyV: 25.5, flowLpm: 0, rssi: -60 },
      { rain: true, moistureRaw: 1801, moisturePct: 31.5, supplyV: 25.25, flowLpm: 12.75, rssi: -61 },
      { rain: true, moistureRaw: 1850, moisturePct: 33, supplyV: 24.75, flowLpm: 13.5, rssi: -65 },
    ];
    const dt = [0, 1000, 2500];
    const now = new Date().toISOString();
    await a.publishAsync(t, JSON.stringify({ v: 1, seq: 1001, at: now, samples: values.map((x, i) => ({ at: new Date(t0 + dt[i]).toISOString(), ...x })) }), { qos: 1 });
    const columns = (start: number) => ({
      t0: new Date(start).toISOString(), dtMs: dt, rain: values.map((x) => x.rain), moistureRaw: values.map((x) => x.moistureRaw),
      moisturePct: values.map((x) => x.moisturePct), supplyV: values.map((x) => x.supplyV), flowLpm: values.map((x) => x.flowLpm), rssi: values.map((x) => x.rssi),
    });
    await a.publishAsync(t, JSON.stringify({ v: 1, seq: 1002, at: now, columns: columns(t0 + 5000) }), { qos: 1 });
    // a board without a flow sensor sends the flow column as null
    await a.publishAsync(t, JSON.stringify({ v: 1, seq: 1003, at: now, columns: { ...columns(t0 + 10_000), flowLpm: null } }), { qos: 1 });
    const rows = async (seq: number) =>
      (await w.tdb.db.execute(sql`select extract(epoch from r.board_at) * 1000 - ${t0} as dt, extract(epoch from r.at) * 1000 - ${t0} as at_dt, rain, moisture_raw, moisture_pct, supply_v, flow_lpm, rssi
        from readings r join controllers c on c.id = r.controller_id where c.serial = ${boardA().serial} and r.seq = ${seq} order by r.board_at`)).rows.map((r) => ({ ...(r as Record<string, unknown>), dt: Number(r.dt), at_dt: Number(r.at_dt) }) as Record<string, unknown> & { dt: number; at_dt: number });
    const objects = await rows(1001);
    expect(objects.map((r) => r.dt)).toEqual(dt);
    expect(objects.map((r) => r.at_dt)).toEqual(dt); // a trusted clock: stored at the board's time
    expect(objects.map((r) => r.moisture_raw)).toEqual([1790, 1801, 1850]);
    const shifted = (rs: typeof objects, by: number) => rs.map((r) => ({ ...r, dt: r.dt - by, at_dt: r.at_dt - by }));
    expect(shifted(await rows(1002), 5000)).toEqual(objects);
    expect(shifted(await rows(1003), 10_000)).toEqual(objects.map((r) => ({ ...r, flow_lpm: null })));

    const malformed0 = stats.dropped.malformed;
    const before = await readingsOf(boardA().serial);
    const bad = [
      { ...columns(t0), rain: [true, false] }, // a column shorter than dtMs
      { ...columns(t0), dtMs: [0, -1000, 2500] }, // a time before t0
      { ...columns(Date.UTC(9999, 11, 31, 23, 59, 59)) }, // samples after the year 9999
      { ...columns(t0), rssi: [-60, -61, 5] }, // a value out of range
    ];
    for (const [i, c] of bad.entries()) await a.publishAsync(t, JSON.stringify({ v: 1, seq: 1010 + i, at: now, columns: c }), { qos: 1 });
    const both = { v: 1, seq: 1020, at: now, columns: columns(t0 + 20_000), samples: [sample()] };
    await a.publishAsync(t, JSON.stringify(both), { qos: 1 });
    const { samples: _s, columns: _c, ...neither } = both;
    await a.publishAsync(t, JSON.stringify(neither), { qos: 1 });
    expect(stats.dropped.malformed - malformed0).toBe(6);
    expect(await readingsOf(boardA().serial)).toBe(before);
    a.end(true);
  });

  it('names each stored telemetry and event message in a receipt on the board’s own topic, a resent one too', async () => {
    const b = await connect(boardB().serial, boardB().serial, boardB().secret);
    const receipts: number[][] = [];
    // (receipts for the test before may still come in: only this test's numbers count)
    b.on('message', (topic, payload) => topic === topicFor(boardB().serial, 'stored') && receipts.push(JSON.parse(payload.toString()).seqs.filter((q: number) => q >= 300)));
    const granted = await new Promise<number[]>((ok) =>
      b.subscribe([topicFor(boardB().serial, 'stored'), topicFor(boardA().serial, 'stored')], { qos: 1 }, (err, g) => {
        const packet = (err as unknown as { packet?: { granted: number[] } })?.packet;
        ok(packet?.granted ?? (g ?? []).map((x) => x.qos));
      }),
    );
    expect(granted).toEqual([1, 128]); // its own receipts only
    const t = topicFor(boardB().serial, 'telemetry');
    await b.publishAsync(t, telemetry(300, 2), { qos: 1 });
    await b.publishAsync(topicFor(boardB().serial, 'event'), JSON.stringify({ v: 1, seq: 301, at: new Date().toISOString(), kind: 'relay', relay: 1, open: false, source: 'button', cmdId: null }), { qos: 1 });
    await b.publishAsync(t, telemetry(302, 2), { qos: 1 });
    await until(() => receipts.flat().length >= 3, 3000);
    expect(receipts.flat().sort()).toEqual([300, 301, 302]);
    // a board that missed its receipt sends the message again: not stored twice, and named again
    const before = await readingsOf(boardB().serial);
    await b.publishAsync(t, telemetry(302, 2), { qos: 1 });
    await until(() => receipts.flat().length >= 4, 3000);
    expect(receipts.flat().slice(3)).toEqual([302]);
    expect(await readingsOf(boardB().serial)).toBe(before);
    // a message that is refused is not named
    await b.publishAsync(t, '{"v":1,"seq":303}', { qos: 1 });
    await new Promise((r) => setTimeout(r, 800));
    expect(receipts.flat()).not.toContain(303);
    b.end(true);
  });

  it('marks a board offline when its connection drops without a goodbye (last-will)', async () => {
    const b = mqtt.connect(w.rt.mqttUrl!, {
      clientId: boardB().serial, username: boardB().serial, password: boardB().secret, reconnectPeriod: 0,
      will: { topic: topicFor(boardB().serial, 'status'), payload: Buffer.from(JSON.stringify({ v: 1, online: false })), qos: 1, retain: true },
    });
    await new Promise((r) => b.once('connect', r));
    await b.publishAsync(topicFor(boardB().serial, 'status'), JSON.stringify({ v: 1, online: true, at: new Date().toISOString() }), { qos: 1, retain: true });
    await until(async () => (await w.tdb.db.execute(sql`select online from controllers where serial = ${boardB().serial}`)).rows[0].online === true);
    (b as unknown as { stream: { destroy: () => void } }).stream.destroy();
    await until(async () => (await w.tdb.db.execute(sql`select online from controllers where serial = ${boardB().serial}`)).rows[0].online === false);
    b.end(true);
  });
});
