import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { createHmac } from 'node:crypto';
import { sessionCookie, startLiveWorld, until, type LiveWorld } from '../helpers/live';

let w: LiveWorld;
let adminCookie: string;

/** A local receiver: records each POST (headers and the raw body) and answers with the next status in line. */
type Hit = { headers: http.IncomingHttpHeaders; body: string; path: string };
async function receiver(statuses: number[] = [200]) {
  const hits: Hit[] = [];
  let i = 0;
  const server = http.createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      hits.push({ headers: req.headers, body: Buffer.concat(chunks).toString('utf8'), path: req.url ?? '' });
      res.statusCode = statuses[Math.min(i++, statuses.length - 1)];
      res.end('ok');
    });
  });
  await new Promise<void>((ok) => server.listen(0, '127.0.0.1', () => ok()));
  const url = `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
  return { url, hits, close: () => new Promise<void>((ok) => server.close(() => ok())) };
}
const receivers: { close: () => Promise<void> }[] = [];

beforeAll(async () => {
  w = await startLiveWorld({ WEBHOOK_RETRY_BASE_MS: '50', WEBHOOK_MAX_ATTEMPTS: '3', WEBHOOK_TIMEOUT_MS: '1000' });
  adminCookie = await sessionCookie(w.rt.url, w.f.users.admin.email);
});
afterAll(async () => {
  for (const r of receivers) await r.close();
  await w?.close();
});

async function call(method: string, path: string, body?: unknown, cookie = adminCookie) {
  const res = await fetch(`${w.rt.url}${path}`, {
    method,
    headers: { cookie, ...(body !== undefined ? { 'content-type': 'application/json' } : {}) },
    body: body !== undefined ? JSON.stringify(body) : undefined,
  });
  return { status: res.status, json: res.status === 204 ? null : await res.json() };
}

const valveEvent = (siteId: number, zoneId: number | null) => ({
  type: 'valve' as const, siteId, controllerId: siteId === w.f.siteA ? w.f.controllerA : w.f.controllerB, zoneId, relay: 1, open: true,
  at: new Date().toISOString(), source: 'command' as const, since: new Date().toISOString(), plannedEnd: null,
});

describe('webhooks', () => {
  it('posts a site’s valve events as JSON with a signature that verifies, and logs the delivery', async () => {
    const rx = await receiver([204]);
    receivers.push(rx);
    const made = await call('POST', '/api/webhooks', { siteId: w.f.siteA, url: `${rx.url}/runnel`, events: ['valve'], description: 'Home hub' });
    expect(made.status, JSON.stringify(made.json)).toBe(201);
    const { webhook, secret } = made.json;
    expect(secret).toMatch(/^whsec_/);
    expect(JSON.stringify((await call('GET', `/api/webhooks/${webhook.id}`)).json)).not.toContain(secret);

    w.rt.services.bus.publish(valveEvent(w.f.siteB, w.f.zoneB)); // another site: not for this hook
    w.rt.services.bus.publish({ type: 'rain', siteId: w.f.siteA, controllerId: w.f.controllerA, tripped: true, at: new Date().toISOString() }); // not subscribed
    w.rt.services.bus.publish(valveEvent(w.f.siteA, w.f.zoneA));
    await until(() => rx.hits.length >= 1);
    await new Promise((r) => setTimeout(r, 200));
    expect(rx.hits).toHaveLength(1);
    const hit = rx.hits[0];
    expect(hit.path).toBe('/runnel');
    expect(hit.headers['content-type']).toBe('application/json');
    expect(hit.headers['x-runnel-event']).toBe('valve');
    const expected = `sha256=${createHmac('sha256', secret).update(hit.body).digest('hex')}`;
    expect(hit.headers['x-runnel-signature']).toBe(expected);
    const body = JSON.parse(hit.body);
    expect(body).toMatchObject({ event: 'valve', siteId: w.f.siteA, data: { zoneId: w.f.zoneA, open: true } });
    expect(hit.headers['x-runnel-delivery']).toBe(body.id);
    // a body changed on the way would not verify
    expect(`sha256=${createHmac('sha256', secret).update(hit.body.replace('true', 'false')).digest('hex')}`).not.toBe(expected);

    const log = await call('GET', `/api/webhooks/${webhook.id}/deliveries`);
    expect(log.json.items).toHaveLength(1);
    expect(log.json.items[0]).toMatchObject({ event: 'valve', state: 'delivered', attempts: 1, lastStatus: 204, lastError: null });
  });

  it('retries a failing receiver with growing waits until it answers, then stops', async () => {
    const rx = await receiver([500, 503, 200]);
    receivers.push(rx);
    const { webhook } = (await call('POST', '/api/webhooks', { siteId: null, url: rx.url, events: ['valve', 'alert'] })).json;
    w.rt.services.bus.publish(valveEvent(w.f.siteB, w.f.zoneB));
    await until(async () => (await call('GET', `/api/webhooks/${webhook.id}/deliveries`)).json.items[0]?.state === 'delivered', 5000);
    const [d] = (await call('GET', `/api/webhooks/${webhook.id}/deliveries`)).json.items;
    expect(d).toMatchObject({ attempts: 3, lastStatus: 200, state: 'delivered' });
    expect(rx.hits).toHaveLength(3);
    expect(new Set(rx.hits.map((h) => h.headers['x-runnel-delivery'])).size).toBe(1); // the same delivery each time
    expect(new Set(rx.hits.map((h) => h.body)).size).toBe(1);
  });

  it('gives up after the last try and says why', async () => {
    const rx = await receiver([500]);
    receivers.push(rx);
    const { webhook } = (await call('POST', '/api/webhooks', { siteId: w.f.siteA, url: rx.url, events: ['alert'] })).json;
    w.rt.services.bus.publish({ type: 'alert', siteId: w.f.siteA, change: 'raised', alert: { id: 1, title: 'Test alert' } });
    await until(async () => (await call('GET', `/api/webhooks/${webhook.id}/deliveries`)).json.items[0]?.state === 'failed', 5000);
    const [d] = (await call('GET', `/api/webhooks/${webhook.id}/deliveries`)).json.items;
    expect(d).toMatchObject({ attempts: 3, lastStatus: 500, lastError: 'The receiver answered 500', nextAttemptAt: null });
    expect(rx.hits).toHaveLength(3);
  });

  it('validates webhooks, rotates the secret, audits changes, and stays admin-only', async () => {
    const bad = await call('POST', '/api/webhooks', { siteId: null, url: 'ftp://example.org/x', events: ['valve'] });
    expect(bad.status).toBe(400);
    expect((await call('POST', '/api/webhooks', { siteId: null, url: 'https://example.org/x', events: ['reading'] })).status).toBe(400);
    expect((await call('POST', '/api/webhooks', { siteId: 999999, url: 'https://example.org/x', events: ['valve'] })).status).toBe(400);
    const { webhook, secret } = (await call('POST', '/api/webhooks', { siteId: null, url: 'https://example.org/x', events: ['valve'], enabled: false })).json;
    const rotated = await call('PATCH', `/api/webhooks/${webhook.id}`, { rotateSecret: true, description: 'renamed' });
    expect(rotated.status).toBe(200);
    expect(rotated.json.secret).toMatch(/^whsec_/);
    expect(rotated.json.secret).not.toBe(secret);
    expect((await call('DELETE', `/api/webhooks/${webhook.id}`)).status).toBe(204);
    const audit = (await call('GET', '/api/audit?action=webhook.*')).json.items.map((e: { action: string }) => e.action);
    expect(audit).toEqual(expect.arrayContaining(['webhook.create', 'webhook.update', 'webhook.delete']));
    expect(JSON.stringify((await call('GET', '/api/audit?entityType=webhook')).json)).not.toContain('whsec_');
    const mgr = await sessionCookie(w.rt.url, w.f.users.manager.email);
    expect((await call('GET', '/api/webhooks', undefined, mgr)).status).toBe(403);
  });
});
