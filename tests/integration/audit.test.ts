import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { sessionCookie, startLiveWorld, type LiveWorld } from '../helpers/live';

/** Every kind of change leaves an entry (who, when, from where, before and after); each role reads what it may. */
let w: LiveWorld;
const cookies: Record<string, string> = {};

beforeAll(async () => {
  w = await startLiveWorld();
  for (const who of ['admin', 'manager', 'technician', 'owner'] as const) cookies[who] = await sessionCookie(w.rt.url, w.f.users[who].email);
});
afterAll(async () => {
  await w?.close();
});

async function call(who: string, method: string, path: string, body?: unknown) {
  const res = await fetch(`${w.rt.url}${path}`, {
    method,
    headers: { cookie: cookies[who], ...(body !== undefined ? { 'content-type': 'application/json' } : {}) },
    body: body !== undefined ? JSON.stringify(body) : undefined,
  });
  return { status: res.status, json: res.status === 204 ? null : await res.json().catch(() => null) };
}
type Entry = { id: number; at: string; action: string; entityType: string; entityId: string | null; siteId: number | null; ip: string | null; outcome: string; actor: { userId: number | null; label: string }; before: unknown; after: unknown };
const audit = async (who: string, query = '') => (await call(who, 'GET', `/api/audit?pageSize=200${query}`)).json as { items: Entry[]; total: number; page: number; pageSize: number };

describe('the audit log', () => {
  it('records every kind of change with who, when, from which address and what changed', async () => {
    const zone = await call('manager', 'PATCH', `/api/zones/${w.f.zoneA}`, { headCount: 9 });
    expect(zone.status).toBe(200);
    expect((await call('manager', 'PATCH', `/api/controllers/${w.f.controllerA}`, { staggerMs: 700 })).status).toBe(200);
    expect((await call('manager', 'PATCH', `/api/sites/${w.f.siteA}`, { rainDelayHours: 12 })).status).toBe(200);
    const prog = await call('manager', 'POST', `/api/sites/${w.f.siteA}/programs`, {
      name: 'Audit program', startTimes: ['05:30'], dayRule: { kind: 'weekdays', weekdays: [2, 4] }, zones: [{ zoneId: w.f.zoneA, minutes: 4 }],
    });
    expect(prog.status, JSON.stringify(prog.json)).toBe(201);
    expect((await call('manager', 'PATCH', `/api/programs/${prog.json.id}`, { name: 'Audit program, renamed' })).status).toBe(200);
    await call('technician', 'POST', `/api/zones/${w.f.zoneA}/start`, { minutes: 1 });
    await call('technician', 'POST', `/api/zones/${w.f.zoneA}/stop`);
    expect((await call('admin', 'PATCH', `/api/users/${w.f.users.owner.id}`, { name: 'Owner, renamed' })).status).toBe(200);
    expect((await call('manager', 'PUT', '/api/me/mail-preferences', { alertKinds: ['controller_offline'], alertDelivery: 'daily_digest', weeklySummary: false })).status).toBe(200);
    expect((await call('admin', 'POST', '/api/tokens', { name: 'Audit token', role: 'manager' })).status).toBe(201);
    expect((await call('admin', 'POST', '/api/webhooks', { siteId: null, url: 'https://example.org/hook', events: ['valve'] })).status).toBe(201);
    expect((await call('admin', 'POST', `/api/sites/${w.f.siteA}/controllers/provision`, { name: 'Audit board', relayCount: 4 })).status).toBe(201);

    const { items } = await audit('admin');
    const one = (action: string) => {
      const e = items.find((x) => x.action === action);
      expect(e, action).toBeTruthy();
      expect(e!.ip, `${action} ip`).toMatch(/127\.0\.0\.1/);
      expect(e!.at).toBeTruthy();
      return e!;
    };
    expect(one('auth.sign_in').actor.label).toBeTruthy();
    const z = one('zone.update');
    expect(z.before).toMatchObject({ headCount: 6 });
    expect(z.after).toMatchObject({ headCount: 9 });
    expect(z.actor).toEqual({ userId: w.f.users.manager.id, label: w.f.users.manager.email });
    expect(one('controller.update').after).toMatchObject({ staggerMs: 700 });
    expect(one('site.update').after).toMatchObject({ rainDelayHours: 12 });
    one('program.create');
    one('program.update');
    expect(one('valve.start').siteId).toBe(w.f.siteA);
    one('valve.stop');
    expect(one('user.update').after).toMatchObject({ name: 'Owner, renamed' });
    one('mail_preferences.update');
    one('api_token.create');
    one('webhook.create');
    one('controller.provision');
  });

  it('shows owners only valve entries of their own sites, and technicians their own sites', async () => {
    await call('admin', 'POST', `/api/zones/${w.f.zoneB}/start`, { minutes: 1 });
    const owner = await audit('owner');
    expect(owner.items.length).toBeGreaterThan(0);
    expect(owner.items.every((e) => e.action.startsWith('valve.') && e.siteId === w.f.siteA)).toBe(true);
    const tech = await audit('technician');
    expect(tech.items.some((e) => e.action === 'zone.update')).toBe(true);
    expect(tech.items.every((e) => e.siteId === w.f.siteA)).toBe(true);
    const mgr = await audit('manager');
    expect(mgr.items.some((e) => e.siteId === w.f.siteB)).toBe(true);
    expect(mgr.items.some((e) => e.siteId === null)).toBe(true);
  });

  it('filters by site, person, action family, entity and time, and pages', async () => {
    const bySite = await audit('admin', `&siteId=${w.f.siteB}`);
    expect(bySite.items.every((e) => e.siteId === w.f.siteB)).toBe(true);
    const byUser = await audit('admin', `&userId=${w.f.users.manager.id}`);
    expect(byUser.items.length).toBeGreaterThan(0);
    expect(byUser.items.every((e) => e.actor.userId === w.f.users.manager.id)).toBe(true);
    const valves = await audit('admin', '&action=valve.*');
    expect(valves.items.every((e) => e.action.startsWith('valve.'))).toBe(true);
    const programsOnly = await audit('admin', '&entityType=program');
    expect(programsOnly.items.map((e) => e.action).sort()).toEqual(['program.create', 'program.update']);
    const future = await audit('admin', `&from=${encodeURIComponent(new Date(Date.now() + 3_600_000).toISOString())}`);
    expect(future.items).toEqual([]);
    const today = await audit('admin', `&from=${new Date().toISOString().slice(0, 10)}&to=${new Date().toISOString().slice(0, 10)}`);
    expect(today.total).toBeGreaterThan(5);
    const p1 = (await call('admin', 'GET', '/api/audit?pageSize=2&page=1')).json;
    const p2 = (await call('admin', 'GET', '/api/audit?pageSize=2&page=2')).json;
    expect(p1.items).toHaveLength(2);
    expect(p1.total).toBe(p2.total);
    expect(p1.items[1].id).toBeGreaterThan(p2.items[0].id);
    const bad = await call('admin', 'GET', '/api/audit?action=DROP%20TABLE');
    expect(bad.status).toBe(400);
  });
});
