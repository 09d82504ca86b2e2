import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { SimBoard, type SimBoardOptions } from '../../../simulator/board';
import { ManualClock } from '../../../simulator/clock';
import { Uplink } from '../../../simulator/uplink';
import type { BoardSpec } from '../../../simulator/spec';
import { telemetrySamples } from '../../../server/contracts/protocol';
import { sleep, startBroker, startServerClient, waitFor } from './broker';

let broker: Awaited<ReturnType<typeof startBroker>>;
let server: Awaited<ReturnType<typeof startServerClient>>;
const running: SimBoard[] = [];
let serialNo = 0;

beforeAll(async () => {
  broker = await startBroker();
  server = await startServerClient(broker.url);
});
afterEach(async () => {
  await Promise.all(running.splice(0).map((b) => b.stop()));
});
afterAll(async () => {
  await server.close();
  await broker.close();
});

function spec(extra: Partial<BoardSpec> = {}): BoardSpec {
  return { serial: `SIMT-${String(++serialNo).padStart(4, '0')}`, secret: 'board-secret', relayCount: 4, hasFlowSensor: true, relayFlowsLpm: { 1: 12, 2: 8, 3: 20 }, ...extra };
}

async function boot(s: BoardSpec, opts: Partial<SimBoardOptions> = {}) {
  const b = new SimBoard(s, { brokerUrl: broker.url, sampleIntervalMs: 60_000, reconnectPeriodMs: 100, ...opts });
  running.push(b);
  await b.start();
  await waitFor(() => server.of(s.serial, 'state').length > 0, 'the first state');
  return b;
}

const seqOf = (m: { json: { seq?: number } }) => m.json.seq as number;

describe('simulated relay board over a real broker', () => {
  it('comes online with a retained status and state, and every message fits the protocol', async () => {
    const s = spec({ firmware: 'sim-2.1.0' });
    await boot(s);
    const status = await waitFor(() => server.of(s.serial, 'status')[0], 'status');
    expect(status.json).toMatchObject({ v: 1, online: true, firmware: 'sim-2.1.0', relayCount: 4 });
    const state = server.of(s.serial, 'state')[0];
    expect(state.json.relays).toHaveLength(4);
    expect(state.json.relays.every((r: { open: boolean }) => !r.open)).toBe(true);
    expect(server.of(s.serial).every((m) => m.valid)).toBe(true);
  });

  it('opens a relay on command and publishes the ack first, then the event and the state', async () => {
    const s = spec();
    const b = await boot(s);
    const before = server.of(s.serial).length;
    const id = await server.command(s.serial, { op: 'open', relay: 2, maxOnSeconds: 90 });
    await waitFor(() => server.of(s.serial, 'state').find((m) => m.json.relays[1].cmdId === id), 'the state after the command');
    const after = server.of(s.serial).slice(before);
    expect(after.map((m) => m.kind)).toEqual(['ack', 'event', 'state']);
    expect(after.every((m) => m.valid)).toBe(true);
    const [ack, event, state] = after.map((m) => m.json);
    expect(event).toMatchObject({ kind: 'relay', relay: 2, open: true, source: 'command', cmdId: id });
    expect(state.relays[1]).toMatchObject({ open: true, cmdId: id });
    expect(Date.parse(state.relays[1].closesAt) - Date.parse(state.relays[1].since)).toBe(90_000);
    expect(ack).toMatchObject({ id, ok: true });
    expect(ack.seq < event.seq && event.seq < state.seq).toBe(true);
    expect(b.relayStates()[1].open).toBe(true);
    expect(b.energizeLog.map((e) => e.relay)).toEqual([2]);
  });

  it('closes the relay by itself when maxOnSeconds has passed, reporting source failsafe', async () => {
    const clock = new ManualClock();
    const s = spec();
    const b = await boot(s, { clock });
    const id = await server.command(s.serial, { op: 'open', relay: 3, maxOnSeconds: 2 });
    await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === id), 'the ack');
    clock.advance(1999);
    expect(b.relayStates()[2].open).toBe(true);
    clock.advance(1);
    expect(b.relayStates()[2].open).toBe(false);
    const ev = await waitFor(() => server.of(s.serial, 'event').find((m) => m.json.source === 'failsafe'), 'the failsafe event');
    expect(ev.json).toMatchObject({ relay: 3, open: false, cmdId: id, at: new Date(clock.now()).toISOString() });
    const state = await waitFor(() => server.of(s.serial, 'state').find((m) => m.json.seq > ev.json.seq), 'the state after');
    expect(state.json.relays[2]).toEqual({ open: false, since: null, closesAt: null, cmdId: null });
  });

  it('re-arms the failsafe when an open relay is opened again and acks ok', async () => {
    const clock = new ManualClock();
    const s = spec();
    const b = await boot(s, { clock });
    await server.command(s.serial, { op: 'open', relay: 1, maxOnSeconds: 10 });
    await waitFor(() => server.of(s.serial, 'ack').length === 1, 'the first ack');
    clock.advance(8000);
    const again = await server.command(s.serial, { op: 'open', relay: 1, maxOnSeconds: 10 });
    const ack = await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === again), 'the second ack');
    expect(ack.json.ok).toBe(true);
    expect(server.of(s.serial, 'event')).toHaveLength(1);
    clock.advance(9000);
    expect(b.relayStates()[0].open).toBe(true);
    clock.advance(1000);
    expect(b.relayStates()[0].open).toBe(false);
  });

  it('closes every open relay on close_all: the ack, then one event each and one state', async () => {
    const s = spec();
    const b = await boot(s);
    for (const relay of [1, 3]) await server.command(s.serial, { op: 'open', relay, maxOnSeconds: 60 });
    await waitFor(() => server.of(s.serial, 'state').find((m) => m.json.relays[0].open && m.json.relays[2].open), 'both relays open');
    const before = server.of(s.serial).length;
    const id = await server.command(s.serial, { op: 'close_all' });
    await waitFor(() => server.of(s.serial).slice(before).find((m) => m.kind === 'state' && m.json.relays.every((r: { open: boolean }) => !r.open)), 'the state after close_all');
    const after = server.of(s.serial).slice(before);
    expect(after.map((m) => m.kind)).toEqual(['ack', 'event', 'event', 'state']);
    expect(after[0].json).toMatchObject({ id, ok: true });
    expect(after.slice(1, 3).map((m) => [m.json.relay, m.json.open, m.json.cmdId])).toEqual([[1, false, id], [3, false, id]]);
    expect(b.relayStates().every((r) => !r.open)).toBe(true);
  });

  it('keeps the start-up gap a command asks for, even when the commands arrive together', async () => {
    const s = spec();
    const b = await boot(s);
    const ids = await Promise.all([1, 2, 3].map((relay) => server.command(s.serial, { op: 'open', relay, maxOnSeconds: 60, minGapMs: 150 })));
    await waitFor(() => ids.every((id) => server.of(s.serial, 'ack').some((m) => m.json.id === id)), 'three acks');
    const log = b.energizeLog.map((e) => e.atMs);
    expect(log).toHaveLength(3);
    for (let i = 1; i < log.length; i++) expect(log[i] - log[i - 1]).toBeGreaterThanOrEqual(150);
    // each acknowledgement came once its relay was on
    expect(server.of(s.serial, 'ack').filter((m) => ids.includes(m.json.id)).every((m) => m.json.ok)).toBe(true);
  });

  it('holds an open sent ahead for the time it names from its arrival, whatever the board’s clock says', async () => {
    const s = spec();
    const b = await boot(s);
    // a board clock 90 minutes off plays no part: the wait counts from the command's arrival
    b.setFault({ fault: 'clock_skew', on: true, offsetMinutes: 90 });
    const sentAt = Date.now();
    const id = await server.command(s.serial, { op: 'open', relay: 1, maxOnSeconds: 60, startInMs: 800 });
    await sleep(300);
    expect(b.relayStates()[0].open).toBe(false);
    const ack = await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === id), 'the open answered');
    expect(ack.json.ok).toBe(true);
    expect(b.energizeLog[0].atMs).toBeGreaterThanOrEqual(sentAt + 800);
    expect(b.energizeLog[0].atMs).toBeLessThan(sentAt + 1500);
    // more than a minute ahead is not a valid command
    const far = await server.command(s.serial, { op: 'open', relay: 2, maxOnSeconds: 60, startInMs: 60_001 });
    const refused = await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === far), 'the far open answered');
    expect(refused.json.ok).toBe(false);
    expect(refused.json.error).toMatch(/startInMs/);
    expect(b.relayStates()[1].open).toBe(false);
  });

  it('cancels an open still waiting for its gap when a close for that relay comes first', async () => {
    const s = spec();
    const b = await boot(s);
    await server.command(s.serial, { op: 'open', relay: 1, maxOnSeconds: 60, minGapMs: 2000 });
    const waiting = await server.command(s.serial, { op: 'open', relay: 2, maxOnSeconds: 60, minGapMs: 2000 });
    await sleep(100);
    await server.command(s.serial, { op: 'close', relay: 2 });
    const ack = await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === waiting), 'the waiting open answered');
    expect(ack.json).toMatchObject({ ok: false, error: 'cancelled by a later close' });
    await sleep(2200);
    expect(b.relayStates()[1].open).toBe(false);
    expect(b.energizeLog.map((e) => e.relay)).toEqual([1]);
  });

  it('answers a bad command that has an id with ack ok:false, and ignores one without an id', async () => {
    const s = spec();
    await boot(s);
    await server.raw(s.serial, JSON.stringify({ v: 1, op: 'open', relay: 1, maxOnSeconds: 10, at: new Date().toISOString() }));
    await server.raw(s.serial, 'not json at all');
    const bad = await server.command(s.serial, { op: 'open', relay: 1, maxOnSeconds: 0 });
    const tooHigh = await server.command(s.serial, { op: 'open', relay: 6, maxOnSeconds: 10 });
    const a1 = await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === bad), 'ack of the bad command');
    const a2 = await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === tooHigh), 'ack of relay 6');
    expect(a1.json.ok).toBe(false);
    expect(a1.json.error).toMatch(/maxOnSeconds/);
    expect(a2.json).toMatchObject({ ok: false, error: expect.stringMatching(/relay 6 does not exist/) });
    expect(a2.valid && a1.valid).toBe(true);
    expect(server.of(s.serial, 'ack')).toHaveLength(2);
    expect(server.of(s.serial, 'event')).toHaveLength(0);
  });

  it('ignores commands entirely under no_ack', async () => {
    const s = spec();
    const b = await boot(s);
    b.setFault({ fault: 'no_ack', on: true });
    await server.command(s.serial, { op: 'open', relay: 1, maxOnSeconds: 10 });
    await sleep(300);
    expect(server.of(s.serial, 'ack')).toHaveLength(0);
    expect(b.relayStates()[0].open).toBe(false);
    b.setFault({ fault: 'no_ack', on: false });
    const id = await server.command(s.serial, { op: 'open', relay: 1, maxOnSeconds: 10 });
    await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === id), 'the ack once the fault clears');
  });

  it('keeps a stuck valve open on close, acks ok:false, and closes it when the fault clears', async () => {
    const s = spec();
    const b = await boot(s);
    b.setFault({ fault: 'stuck_valve', on: true, relay: 2 });
    await server.command(s.serial, { op: 'open', relay: 2, maxOnSeconds: 60 });
    const close = await server.command(s.serial, { op: 'close', relay: 2 });
    const ack = await waitFor(() => server.of(s.serial, 'ack').find((m) => m.json.id === close), 'the close ack');
    expect(ack.json).toMatchObject({ ok: false, error: expect.stringMatching(/stuck/) });
    expect(b.relayStates()[1].open).toBe(true);
    expect(server.of(s.serial, 'event').filter((m) => !m.json.open)).toHaveLength(0);
    b.setFault({ fault: 'stuck_valve', on: false, relay: 2 });
    const ev = await waitFor(() => server.of(s.serial, 'event').find((m) => !m.json.open), 'the late close');
    expect(ev.json).toMatchObject({ relay: 2, source: 'command', cmdId: close });
    expect(b.relayStates()[1].open).toBe(false);
  });

  it('reports a local button press as a button event with a ten-minute failsafe', async () => {
    const s = spec();
    const b = await boot(s);
    b.pressButton(4, true);
    const ev = await waitFor(() => server.of(s.serial, 'event')[0], 'the button event');
    expect(ev.json).toMatchObject({ relay: 4, open: true, source: 'button', cmdId: null });
    const r = b.relayStates()[3];
    expect(Date.parse(r.closesAt!) - Date.parse(r.since!)).toBe(600_000);
    expect(() => b.pressButton(5, true)).toThrow(/does not exist/);
  });

  it('reports the sum of the open zones as flow, held back by a closed master valve', async () => {
    const clock = new ManualClock();
    const s = spec({ relayCount: 8, masterValveRelay: 8, relayFlowsLpm: { 1: 12, 2: 8 } });
    const b = await boot(s, { clock, sampleIntervalMs: 1000, samplesPerMessage: 1 });
    b.pressButton(1, true);
    b.pressButton(2, true);
    clock.advance(1000);
    expect(b.latestSample()!.flowLpm).toBeLessThan(0.1);
    b.pressButton(8, true);
    clock.advance(1000);
    const open = b.latestSample()!.flowLpm!;
    expect(open).toBeGreaterThan(20 * 0.97);
    expect(open).toBeLessThan(20 * 1.03);
    b.setFault({ fault: 'broken_head', on: true, relay: 2 });
    clock.advance(1000);
    expect(b.latestSample()!.flowLpm!).toBeGreaterThan((12 + 8 * 2.5) * 0.97);
    b.setFault({ fault: 'clock_skew', on: true, offsetMinutes: 180 });
    clock.advance(1000);
    const sampledAt = Date.parse(b.latestSample()!.at) - 180 * 60_000;
    expect(sampledAt).toBeGreaterThan(clock.now() - 1000);
    expect(sampledAt).toBeLessThanOrEqual(clock.now());
    const tele = await waitFor(() => server.of(s.serial, 'telemetry').length >= 4 && server.of(s.serial, 'telemetry'), 'four telemetry messages');
    expect(tele.every((m) => m.valid)).toBe(true);
  });

  it('reports a change of the rain input at once', async () => {
    const clock = new ManualClock();
    const s = spec();
    const b = await boot(s, { clock, sampleIntervalMs: 1000, samplesPerMessage: 5 });
    b.setRain(true);
    const t = await waitFor(() => server.of(s.serial, 'telemetry')[0], 'telemetry after the rain trip');
    expect(telemetrySamples(t.json).at(-1)!.rain).toBe(true);
  });

  it('fires the last-will when dropped off the network, buffers, and replays in seq order with no gap', async () => {
    const s = spec();
    const b = await boot(s, { sampleIntervalMs: 20, samplesPerMessage: 2 });
    await waitFor(() => server.of(s.serial, 'telemetry').length >= 3, 'some telemetry');
    b.setFault({ fault: 'offline', on: true });
    const will = await waitFor(() => server.of(s.serial, 'status').find((m) => m.json.online === false), 'the last-will');
    expect(will.json).toEqual({ v: 1, online: false });
    expect(b.online).toBe(false);
    b.pressButton(1, true);
    await sleep(400);
    b.pressButton(1, false);
    const offline = b.stats;
    expect(offline.samplesBuffered).toBeGreaterThan(10);
    const telemetryWhileOff = server.of(s.serial, 'telemetry').length;
    await sleep(150);
    expect(server.of(s.serial, 'telemetry').length).toBe(telemetryWhileOff);

    b.setFault({ fault: 'offline', on: false });
    await waitFor(() => b.online && b.stats.samplesBuffered === 0, 'the reconnect');
    await sleep(200);
    await b.stop();
    running.splice(running.indexOf(b), 1);
    await sleep(100);

    const stats = b.stats;
    expect(stats.reconnects).toBe(1);
    expect(stats.dropped).toBe(0);
    const msgs = server.of(s.serial).filter((m) => m.kind !== 'status');
    expect(msgs.every((m) => m.valid)).toBe(true);
    // Redeliveries (same seq) are allowed and identical; first sightings run strictly upward with no gap.
    const bySeq = new Map<number, string>();
    const order: number[] = [];
    for (const m of msgs) {
      const prev = bySeq.get(seqOf(m));
      if (prev !== undefined) expect(JSON.stringify(m.json)).toBe(prev);
      else {
        bySeq.set(seqOf(m), JSON.stringify(m.json));
        order.push(seqOf(m));
      }
    }
    for (let i = 1; i < order.length; i++) expect(order[i]).toBe(order[i - 1] + 1);
    const events = msgs.filter((m) => m.kind === 'event').map((m) => m.json);
    expect(events.map((e) => [e.open, e.source])).toEqual([[true, 'button'], [false, 'button']]);
    // Every sample the board counts as sent arrived exactly once, in time order.
    const samples = [...new Map(msgs.filter((m) => m.kind === 'telemetry').map((m) => [seqOf(m), telemetrySamples(m.json)])).values()].flat();
    expect(samples.length).toBe(stats.samplesSent);
    expect(stats.samplesSent).toBeGreaterThan(offline.samplesBuffered);
    for (let i = 1; i < samples.length; i++) expect(Date.parse(samples[i].at)).toBeGreaterThan(Date.parse(samples[i - 1].at));
    // The state refreshed after the reconnect, and a clean stop leaves "offline" retained.
    expect(server.of(s.serial, 'status').at(-1)!.json.online).toBe(false);
    expect(server.of(s.serial, 'status').filter((m) => m.json.online).length).toBe(2);
  });

  it('stops promptly even while dropped off the network', async () => {
    const s = spec();
    const b = await boot(s);
    b.setFault({ fault: 'offline', on: true });
    await waitFor(() => !b.online, 'the drop');
    const t0 = Date.now();
    await b.stop();
    expect(Date.now() - t0).toBeLessThan(1500);
    await sleep(300);
    expect(server.of(s.serial, 'status').filter((m) => m.json.online)).toHaveLength(1);
  });

  it('produces the same samples for the same seed, and different ones for another seed', async () => {
    const s = spec();
    async function samplesWith(seed: number) {
      const clock = new ManualClock();
      const b = new SimBoard(s, { brokerUrl: broker.url, seed, clock, sampleIntervalMs: 1000, samplesPerMessage: 5, seqStart: 1, reconnectPeriodMs: 100 });
      const from = server.seen.length;
      await b.start();
      b.pressButton(1, true);
      clock.advance(12_000);
      const tele = await waitFor(() => {
        const t = server.seen.slice(from).filter((m) => m.serial === s.serial && m.kind === 'telemetry');
        return t.length >= 2 && t;
      }, 'two telemetry messages');
      await b.stop();
      return tele.slice(0, 2).map((m) => m.json);
    }
    const a = await samplesWith(7);
    const again = await samplesWith(7);
    const other = await samplesWith(8);
    expect(telemetrySamples(a[0])).toHaveLength(5);
    expect(again).toEqual(a);
    const raw = (ts: typeof a) => ts.map((t) => telemetrySamples(t).map((x) => x.moistureRaw));
    expect(raw(other)).not.toEqual(raw(a));
  });

  it('takes a message’s samples together in burst mode: the same values, each at its own time', async () => {
    const s = spec();
    async function messages(samplesInBursts: boolean) {
      const clock = new ManualClock();
      const b = new SimBoard(s, { brokerUrl: broker.url, seed: 9, clock, sampleIntervalMs: 1000, samplesPerMessage: 5, samplesInBursts, seqStart: 1, reconnectPeriodMs: 100 });
      const from = server.seen.length;
      await b.start();
      b.pressButton(2, true);
      clock.advance(12_000);
      const tele = await waitFor(() => {
        const t = server.seen.slice(from).filter((m) => m.serial === s.serial && m.kind === 'telemetry');
        return t.length >= 2 && t;
      }, 'two telemetry messages');
      await b.stop();
      return tele.slice(0, 2).map((m) => ({ samples: telemetrySamples(m.json) }));
    }
    const steady = await messages(false);
    const burst = await messages(true);
    const values = (ms: typeof steady) => ms.map((m) => m.samples.map(({ at: _at, ...v }) => v));
    expect(burst[0].samples).toHaveLength(5);
    expect(values(burst)).toEqual(values(steady));
    // one second apart within a message and across messages, as if taken one by one
    const times = burst.flatMap((m) => m.samples.map((x) => Date.parse(x.at)));
    expect(times.slice(1).map((t, i) => t - times[i])).toEqual(Array(9).fill(1000));
    expect(burst[0].samples[0].flowLpm).toBeGreaterThan(0);
  });
});

describe('simulated relay board when the broker goes away', () => {
  it('keeps sampling while the broker is gone and replays everything once a broker is back', async () => {
    const first = await startBroker();
    const s = spec();
    const b = new SimBoard(s, { brokerUrl: first.url, sampleIntervalMs: 20, samplesPerMessage: 2, reconnectPeriodMs: 400 });
    await b.start();
    await sleep(100);
    await first.close();
    await waitFor(() => !b.online, 'the board to notice');
    await sleep(300);
    expect(b.stats.samplesBuffered).toBeGreaterThan(5);
    const second = await startBroker(first.port);
    const listener = await startServerClient(second.url);
    try {
      await waitFor(() => b.online && b.stats.samplesBuffered === 0 && listener.of(s.serial, 'state').length > 0, 'the replay');
      const tele = listener.of(s.serial, 'telemetry');
      // The buffered samples are older than the reconnect and come first, in seq order.
      const seqs = tele.map((m) => m.json.seq as number);
      expect(seqs.length).toBeGreaterThan(3);
      for (let i = 1; i < seqs.length; i++) expect(seqs[i]).toBeGreaterThan(seqs[i - 1]);
      const state = listener.of(s.serial, 'state')[0];
      expect(state.json.seq).toBeGreaterThan(seqs[0]);
      expect(b.stats.reconnects).toBe(1);
    } finally {
      await b.stop();
      await listener.close();
      await second.close();
    }
  });

  it('hands a long backlog from many boards over in each board’s own order, with no gap, and answers a command in the middle of it', async () => {
    // 30 boards, a message every millisecond each, and rounds of the shared hand-over cut short,
    // so thousands wait in it at once (the queue is then read from a head index and trimmed)
    const specs = Array.from({ length: 30 }, () => spec());
    const boards = await Promise.all(specs.map((s) => boot(s, { sampleIntervalMs: 1, samplesPerMessage: 1 })));
    let longest = 0;
    const watch = setInterval(() => (longest = Math.max(longest, Uplink.waiting)), 5);
    Uplink.sliceMs = 0;
    try {
      await sleep(1500);
      const id = await server.command(specs[7].serial, { op: 'open', relay: 1, maxOnSeconds: 60 });
      const ack = await waitFor(() => server.of(specs[7].serial, 'ack').find((m) => m.json.id === id), 'the ack behind the backlog', 15_000);
      expect(ack.json.ok).toBe(true);
    } finally {
      Uplink.sliceMs = 8;
    }
    await Promise.all(boards.map((b) => b.stop()));
    running.length = 0;
    clearInterval(watch);
    await sleep(300);
    // (long enough for the hand-over to trim the part of the queue it has read past)
    expect(longest).toBeGreaterThan(4096);
    let telemetry = 0;
    specs.forEach((s, i) => {
      const seqs = server.of(s.serial).filter((m) => typeof m.json.seq === 'number').map(seqOf);
      // each board's messages reach the broker in the order they were made, none missing
      expect(seqs.length).toBeGreaterThan(100);
      expect(seqs).toEqual(Array.from({ length: seqs.length }, (_, k) => seqs[0] + k));
      const seen = server.of(s.serial, 'telemetry').length;
      expect(seen).toBe(boards[i].stats.published.telemetry);
      telemetry += seen;
    });
    expect(telemetry).toBeGreaterThan(30 * 200);
  });
});
