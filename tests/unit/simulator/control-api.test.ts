import { describe, expect, it } from 'vitest';
import request from 'supertest';
import { SimBoard } from '../../../simulator/board';
import { ManualClock } from '../../../simulator/clock';
import { createControlApp } from '../../../simulator/control-api';

// Boards that are never started: the API drives their inputs without any broker.
function setup() {
  const clock = new ManualClock();
  const boards = new Map<string, SimBoard>();
  for (const serial of ['RLY-0101', 'RLY-0102'])
    boards.set(serial, new SimBoard({ serial, secret: 'secret-secret', relayCount: 4, hasFlowSensor: true, relayFlowsLpm: { 1: 10 } }, { brokerUrl: 'mqtt://127.0.0.1:1', clock }));
  return { app: createControlApp({ boards }), boards, clock };
}

describe('simulator control API', () => {
  it('reports health with the number of boards and how many are online', async () => {
    const res = await request(setup().app).get('/health');
    expect(res.status).toBe(200);
    expect(res.body).toEqual({ status: 'ok', controllers: 2, online: 0 });
  });

  it('lists every controller with relays, rain, faults and latest sample', async () => {
    const res = await request(setup().app).get('/controllers');
    expect(res.status).toBe(200);
    expect(res.body.controllers.map((c: { serial: string }) => c.serial)).toEqual(['RLY-0101', 'RLY-0102']);
    const c = res.body.controllers[0];
    expect(c).toMatchObject({ online: false, rain: false, latestSample: null, relayCount: 4 });
    expect(c.relays).toHaveLength(4);
    expect(c.faults).toEqual({ offline: false, no_ack: false, stuck_valve: [], broken_head: [], clogged: [], clock_skew: 0, low_voltage: false });
  });

  it('trips and clears the rain input', async () => {
    const { app, boards } = setup();
    const on = await request(app).post('/controllers/RLY-0101/rain').send({ tripped: true });
    expect(on.status).toBe(200);
    expect(on.body.rain).toBe(true);
    expect(boards.get('RLY-0101')!.rainTripped).toBe(true);
    await request(app).post('/controllers/RLY-0101/rain').send({ tripped: false });
    expect(boards.get('RLY-0101')!.rainTripped).toBe(false);
  });

  it('switches a relay fault on and off', async () => {
    const { app, boards } = setup();
    const on = await request(app).post('/controllers/RLY-0102/faults').send({ fault: 'broken_head', on: true, relay: 1 });
    expect(on.status).toBe(200);
    expect(on.body.faults.broken_head).toEqual([1]);
    await request(app).post('/controllers/RLY-0102/faults').send({ fault: 'clock_skew', on: true, offsetMinutes: 180 });
    expect(boards.get('RLY-0102')!.faults().clock_skew).toBe(180);
    const off = await request(app).post('/controllers/RLY-0102/faults').send({ fault: 'broken_head', on: false });
    expect(off.body.faults.broken_head).toEqual([]);
  });

  it('opens a relay from the local button, with the ten-minute button failsafe', async () => {
    const { app, clock } = setup();
    const res = await request(app).post('/controllers/RLY-0101/button').send({ relay: 2, open: true });
    expect(res.status).toBe(200);
    expect(res.body.relays[1]).toMatchObject({ relay: 2, open: true, cmdId: null });
    expect(Date.parse(res.body.relays[1].closesAt) - Date.parse(res.body.relays[1].since)).toBe(600_000);
    clock.advance(600_000);
    const after = await request(app).get('/controllers/RLY-0101');
    expect(after.body.relays[1].open).toBe(false);
  });

  it('answers a body that fails validation with 400 and field details', async () => {
    const { app } = setup();
    const res = await request(app).post('/controllers/RLY-0101/faults').send({ fault: 'stuck_valve', on: true });
    expect(res.status).toBe(400);
    expect(res.body.error.code).toBe('validation_failed');
    expect(res.body.error.details).toEqual(expect.arrayContaining([expect.objectContaining({ path: 'relay' })]));
    const rain = await request(app).post('/controllers/RLY-0101/rain').send({ tripped: 'yes' });
    expect(rain.status).toBe(400);
    expect(rain.body.error.details[0].path).toBe('tripped');
  });

  it('refuses a relay the board does not have with 400', async () => {
    const res = await request(setup().app).post('/controllers/RLY-0101/button').send({ relay: 6, open: true });
    expect(res.status).toBe(400);
    expect(res.body.error.code).toBe('unknown_relay');
  });

  it('answers malformed JSON with 400 bad_json', async () => {
    const res = await request(setup().app).post('/controllers/RLY-0101/rain').set('content-type', 'application/json').send('{"tripped":');
    expect(res.status).toBe(400);
    expect(res.body.error.code).toBe('bad_json');
  });

  it('answers an unknown serial or route with 404 in the one error shape', async () => {
    const { app } = setup();
    const res = await request(app).post('/controllers/RLY-9999/rain').send({ tripped: true });
    expect(res.status).toBe(404);
    expect(res.body.error).toMatchObject({ code: 'not_found' });
    const route = await request(app).get('/nothing-here');
    expect(route.status).toBe(404);
    expect(route.body.error.code).toBe('not_found');
  });
});
