import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { sql } from 'drizzle-orm';
import { watchOf } from '../../server/alerts/watch';
import { liveClient, sessionCookie, startLiveWorld, type LiveWorld } from '../helpers/live';

let w: LiveWorld;
let adminCookie: string;

beforeAll(async () => {
  w = await startLiveWorld();
  adminCookie = await sessionCookie(w.rt.url, w.f.users.admin.email);
});
afterAll(async () => {
  await w?.close();
});

const patchUser = (id: number, body: object) =>
  fetch(`${w.rt.url}/api/users/${id}`, { method: 'PATCH', headers: { cookie: adminCookie, 'content-type': 'application/json' }, body: JSON.stringify(body) });

describe('a disabled person, live', () => {
  it('loses their live socket and their session at once, not at the next 15-second check', async () => {
    const id = w.f.users.technician.id;
    const cookie = await sessionCookie(w.rt.url, w.f.users.technician.email);
    const live = await liveClient(w.rt.url, cookie);
    await live.waitFor((m) => m.type === 'snapshot');
    const closed = new Promise<{ code: number; at: number }>((ok) => live.ws.once('close', (code) => ok({ code, at: Date.now() })));
    const t0 = Date.now();
    const res = await patchUser(id, { disabled: true });
    expect(res.status).toBe(200);
    const { code, at } = await closed;
    expect(code).toBe(4401);
    expect(at - t0).toBeLessThan(3000);
    const rows = (await w.tdb.db.execute(sql`select count(*)::int as n from sessions where sess->>'userId' = ${String(id)}`)).rows[0].n;
    expect(rows).toBe(0);
    expect((await fetch(`${w.rt.url}/api/sites`, { headers: { cookie } })).status).toBe(401);
    await expect(liveClient(w.rt.url, cookie)).rejects.toThrow(/401/);
    expect((await patchUser(id, { disabled: false })).status).toBe(200);
  });

  it('sees a change of sites on the live socket without signing in again', async () => {
    const id = w.f.users.owner.id;
    const cookie = await sessionCookie(w.rt.url, w.f.users.owner.email);
    const live = await liveClient(w.rt.url, cookie);
    const first = await live.waitFor((m) => m.type === 'snapshot');
    const siteIdsOf = (m: Record<string, unknown>) => JSON.stringify(m).includes(`"siteId":${w.f.siteB}`);
    expect(siteIdsOf(first)).toBe(false);
    live.messages.length = 0;
    expect((await patchUser(id, { siteIds: [w.f.siteA, w.f.siteB] })).status).toBe(200);
    const second = await live.waitFor((m) => m.type === 'snapshot', 3000);
    expect(siteIdsOf(second)).toBe(true);
    live.close();
  });
});

describe('invitations on the running server', () => {
  it('go out through the same mailer as alert mail, with a link to this server', async () => {
    const smtp = watchOf(w.rt.services)!.fakeSmtp!;
    const res = await fetch(`${w.rt.url}/api/users/invitations`, {
      method: 'POST',
      headers: { cookie: adminCookie, 'content-type': 'application/json' },
      body: JSON.stringify({ email: 'runtime-invite@crew.test', name: 'Runtime Invite', role: 'manager' }),
    });
    expect(res.status).toBe(201);
    expect((await res.json()).mailed).toBe(true);
    const mail = await smtp.waitFor((m) => m.envelopeTo.includes('runtime-invite@crew.test'));
    const link = new RegExp(`${w.rt.url.replace(/[.:/]/g, '\\$&')}/accept-invite\\?token=([A-Za-z0-9_-]+)`).exec(mail.text);
    expect(link, mail.text).toBeTruthy();
    const accept = await fetch(`${w.rt.url}/api/auth/accept-invite`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ token: link![1], password: 'a-long-runtime-password' }),
    });
    expect(accept.status).toBe(200);
    await sessionCookie(w.rt.url, 'runtime-invite@crew.test', 'a-long-runtime-password');
  });
});
