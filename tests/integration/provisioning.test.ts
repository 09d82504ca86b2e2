import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import mqtt, { type MqttClient } from 'mqtt';
import { eq, sql } from 'drizzle-orm';
import { controllers, programZones, programs, zones } from '../../server/db/schema/index';
import { programCrons } from '../../server/scheduler/calendar';
import { sessionCookie, startLiveWorld, until, type LiveWorld } from '../helpers/live';

let w: LiveWorld;
let adminCookie: string;
let techCookie: string;
const clients: MqttClient[] = [];

beforeAll(async () => {
  w = await startLiveWorld();
  adminCookie = await sessionCookie(w.rt.url, w.f.users.admin.email);
  techCookie = await sessionCookie(w.rt.url, w.f.users.technician.email);
});
afterAll(async () => {
  for (const c of clients) c.end(true);
  await w?.close();
});

async function call(method: string, path: string, body?: unknown, cookie = adminCookie) {
  const res = await fetch(`${w.rt.url}${path}`, {
    method,
    headers: { cookie, ...(body !== undefined ? { 'content-type': 'application/json' } : {}) },
    body: body !== undefined ? JSON.stringify(body) : undefined,
  });
  const text = await res.text();
  let json: any = null; // eslint-disable-line @typescript-eslint/no-explicit-any
  try {
    json = JSON.parse(text);
  } catch {
    /* html */
  }
  return { status: res.status, json, text, headers: res.headers };
}

/** Connect as a board; resolves with the client, or rejects with the broker's refusal. */
function board(serial: string, secret: string) {
  const c = mqtt.connect(w.rt.mqttUrl!, { clientId: serial, username: serial, password: secret, reconnectPeriod: 0, connectTimeout: 3000 });
  clients.push(c);
  return new Promise<MqttClient>((ok, fail) => {
    c.once('connect', () => ok(c));
    c.once('error', (e) => fail(e));
    c.once('close', () => fail(new Error('closed')));
  });
}
const closed = (c: MqttClient) => new Promise<void>((ok) => (c.connected ? c.once('close', () => ok()) : ok()));

async function provision(name = 'Pump house board') {
  const r = await call('POST', `/api/sites/${w.f.siteA}/controllers/provision`, { name, relayCount: 6, hasFlowSensor: true });
  expect(r.status, JSON.stringify(r.json)).toBe(201);
  return r.json as { controller: { id: number; siteId: number }; serial: string; secret: string; setupSheetUrl: string };
}

describe('provisioning', () => {
  it('generates the serial and secret, shows the secret once and stores only its hash', async () => {
    const p = await provision();
    expect(p.serial).toMatch(/^RN-[A-HJ-NP-Z2-9]{4}-[A-HJ-NP-Z2-9]{4}$/);
    expect(p.secret.length).toBeGreaterThanOrEqual(32);
    expect(p.controller).toMatchObject({ siteId: w.f.siteA, relayCount: 6, hasFlowSensor: true, hasSecret: true });
    expect(JSON.stringify(p.controller)).not.toContain(p.secret);
    const [row] = await w.tdb.db.select().from(controllers).where(eq(controllers.id, p.controller.id));
    expect(row.secretHash).toMatch(/^\$argon2id\$/);
    expect(JSON.stringify(await call('GET', `/api/controllers/${p.controller.id}`).then((r) => r.json))).not.toContain(p.secret);
    const c = await board(p.serial, p.secret);
    expect(c.connected).toBe(true);
    c.end(true);
    const audit = await call('GET', `/api/audit?action=controller.provision`);
    expect(audit.json.items[0]).toMatchObject({ entityId: String(p.controller.id), siteId: w.f.siteA });
    expect(JSON.stringify(audit.json)).not.toContain(p.secret);
  });

  it('prints a setup sheet: site, serial, relay map, broker, caution, QR — the secret only when just given', async () => {
    const p = await provision('Sheet board');
    const sheet = await call('GET', p.setupSheetUrl, undefined, techCookie);
    expect(sheet.status).toBe(200);
    expect(sheet.headers.get('content-type')).toMatch(/text\/html/);
    expect(sheet.headers.get('cache-control')).toBe('no-store');
    for (const s of ['Test Site A', p.serial, 'mqtt://127.0.0.1:', 'mains voltage', '<svg', 'Relay map', 'Sheet board']) expect(sheet.text).toContain(s);
    expect(sheet.text).not.toContain(p.secret);
    expect(sheet.text).not.toMatch(/<script/i);
    const withSecret = await call('POST', p.setupSheetUrl, { secret: p.secret });
    expect(withSecret.status).toBe(200);
    expect(withSecret.text).toContain(p.secret);
    const form = await fetch(`${w.rt.url}${p.setupSheetUrl}`, {
      method: 'POST',
      headers: { cookie: adminCookie, 'content-type': 'application/x-www-form-urlencoded', origin: w.rt.url },
      body: `secret=${encodeURIComponent(p.secret)}`,
    });
    expect(form.status).toBe(200);
    const wrong = await call('POST', p.setupSheetUrl, { secret: 'x'.repeat(32) });
    expect(wrong.status).toBe(400);
    expect(wrong.json.error.code).toBe('secret_mismatch');
    expect(JSON.stringify(wrong.json)).not.toContain('x'.repeat(32));
  });

  it('rotating the secret disconnects the board; the broker then refuses the old secret and accepts the new one', async () => {
    const p = await provision('Rotating board');
    const live = await board(p.serial, p.secret);
    const gone = closed(live);
    const r = await call('POST', `/api/controllers/${p.controller.id}/rotate-secret`);
    expect(r.status).toBe(200);
    expect(r.json).toMatchObject({ controllerId: p.controller.id, serial: p.serial });
    expect(r.json.secret).not.toBe(p.secret);
    await gone;
    await expect(board(p.serial, p.secret)).rejects.toThrow(/Bad username or password|Not authorized|closed/i);
    const fresh = await board(p.serial, r.json.secret);
    expect(fresh.connected).toBe(true);
    fresh.end(true);
    const audit = await call('GET', `/api/audit?action=controller.rotate_secret`);
    expect(audit.json.items[0].entityId).toBe(String(p.controller.id));
  });

  it('a retired controller is dropped and cannot connect again; its row and history stay', async () => {
    const p = await provision('Retiring board');
    const live = await board(p.serial, p.secret);
    await until(() => w.rt.services.fleet.getById(p.controller.id));
    const gone = closed(live);
    const r = await call('POST', `/api/controllers/${p.controller.id}/retire`);
    expect(r.status, JSON.stringify(r.json)).toBe(200);
    expect(r.json.retiredAt).toBeTruthy();
    await gone;
    await expect(board(p.serial, p.secret)).rejects.toThrow();
    expect(w.rt.services.fleet.getById(p.controller.id)).toBeUndefined();
    const [row] = await w.tdb.db.select().from(controllers).where(eq(controllers.id, p.controller.id));
    expect(row.retiredAt).toBeTruthy();
    expect((await call('POST', `/api/controllers/${p.controller.id}/retire`)).status).toBe(409);
    expect((await call('POST', `/api/controllers/${p.controller.id}/rotate-secret`)).status).toBe(409);
  });

  it('moves a controller with its zones; they leave the old site’s programs', async () => {
    const p = await provision('Moving board');
    const [z] = await w.tdb.db
      .insert(zones)
      .values({ controllerId: p.controller.id, relay: 2, name: 'Moving zone', plantType: 'shrubs', soilTexture: 'loam', headType: 'drip', headCount: 10, flowPerHeadLpm: 0.5, areaM2: 10, rootDepthM: 0.4 })
      .returning();
    const startTimes = ['05:00'];
    const dayRule = { kind: 'weekdays' as const, weekdays: [1] };
    const [prog] = await w.tdb.db.insert(programs).values({ siteId: w.f.siteA, name: 'Old site program', startTimes, dayRule, crons: programCrons({ startTimes, dayRule, activeFrom: null, activeTo: null }) }).returning();
    await w.tdb.db.insert(programZones).values({ programId: prog.id, zoneId: z.id, minutes: 5, position: 1 });
    const r = await call('POST', `/api/controllers/${p.controller.id}/move`, { siteId: w.f.siteB });
    expect(r.status, JSON.stringify(r.json)).toBe(200);
    expect(r.json).toMatchObject({ controller: { siteId: w.f.siteB }, removedFromPrograms: 1 });
    expect((await call('GET', `/api/zones/${z.id}`)).json.siteId).toBe(w.f.siteB);
    expect(await w.tdb.db.select().from(programZones).where(eq(programZones.programId, prog.id))).toHaveLength(0);
    expect(w.rt.services.fleet.getById(p.controller.id)?.siteId).toBe(w.f.siteB);
    // the technician sees site A only: the moved board is gone for them
    expect((await call('GET', `/api/controllers/${p.controller.id}`, undefined, techCookie)).status).toBe(404);
    expect((await call('POST', `/api/controllers/${p.controller.id}/move`, { siteId: 999999 })).json.error.details[0].path).toBe('siteId');
  });
});

describe('relay map', () => {
  it('shows each relay and what it is wired to, and re-wires zones in one transaction', async () => {
    const p = await provision('Map board');
    await call('PATCH', `/api/controllers/${p.controller.id}`, { masterValveRelay: 6 });
    const mk = async (relay: number, name: string) =>
      (await w.tdb.db.insert(zones).values({ controllerId: p.controller.id, relay, name, plantType: 'shrubs', soilTexture: 'loam', headType: 'drip', headCount: 10, flowPerHeadLpm: 0.5, areaM2: 10, rootDepthM: 0.4 }).returning())[0].id;
    const one = await mk(1, 'North beds');
    const two = await mk(2, 'South beds');
    const map = await call('GET', `/api/controllers/${p.controller.id}/relays`, undefined, techCookie);
    expect(map.status).toBe(200);
    expect(map.json.relays.map((r: { use: string }) => r.use)).toEqual(['zone', 'zone', 'free', 'free', 'free', 'master_valve']);
    expect(map.json.relays[0]).toMatchObject({ relay: 1, zone: { id: one, name: 'North beds' } });

    const swap = await call('PUT', `/api/controllers/${p.controller.id}/relays`, { map: [{ relay: 1, zoneId: two }, { relay: 4, zoneId: one }, { relay: 2, zoneId: null }] });
    expect(swap.status, JSON.stringify(swap.json)).toBe(200);
    expect(swap.json.relays.map((r: { zone: { id: number } | null }) => r.zone?.id ?? null)).toEqual([two, null, null, one, null, null]);
    expect(w.rt.services.fleet.getById(p.controller.id)?.zoneByRelay.get(4)).toBe(one);

    const before = (await w.tdb.db.execute(sql`select id, relay from zones where controller_id = ${p.controller.id} order by id`)).rows;
    const bad = await call('PUT', `/api/controllers/${p.controller.id}/relays`, { map: [{ relay: 6, zoneId: one }, { relay: 7, zoneId: two }] });
    expect(bad.status).toBe(400);
    const msgs = bad.json.error.details.map((d: { message: string }) => d.message).join(' | ');
    expect(msgs).toMatch(/master valve/);
    expect(msgs).toMatch(/6 relays/);
    const missing = await call('PUT', `/api/controllers/${p.controller.id}/relays`, { map: [{ relay: 3, zoneId: one }] });
    expect(missing.json.error.details[0].message).toMatch(/South beds has no relay/);
    const dup = await call('PUT', `/api/controllers/${p.controller.id}/relays`, { map: [{ relay: 3, zoneId: one }, { relay: 3, zoneId: two }] });
    expect(dup.status).toBe(400);
    expect((await w.tdb.db.execute(sql`select id, relay from zones where controller_id = ${p.controller.id} order by id`)).rows).toEqual(before);
    expect((await call('PUT', `/api/controllers/${p.controller.id}/relays`, { map: [{ relay: 1, zoneId: one }, { relay: 2, zoneId: two }] }, techCookie)).status).toBe(403);
    const audit = await call('GET', `/api/audit?action=controller.relays`);
    expect(audit.json.items[0].after.relays).toEqual({ 1: two, 4: one });
  });
});
