import { randomInt } from 'node:crypto';
import { MAINS_CAUTION, WATER_AND_GROUND_CAUTION } from '../contracts/cautions';
import argon2 from 'argon2';
import QRCode from 'qrcode';
import { and, eq, inArray, ne, sql } from 'drizzle-orm';
import { inTx, type Db } from '../db/client';
import { controllers, programZones, programs, sites, zoneMarkers, zones, type Controller } from '../db/schema/index';
import { moveControllerSchema, provisionControllerSchema, relayMapSchema, setupSheetSchema, type RelayView } from '../contracts/tokens';
import { parse } from '../middleware/validate';
import { AppError, conflict, forbidden } from '../errors';
import type { Services } from './registry';
import type { Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleController } from './controllers';
import { generateDeviceSecret, hashDeviceSecret } from './device-secrets';
import { loadVisibleSite } from './sites';
import { controllerView, type ControllerView } from './views';

/** The live parts are optional: an API-only app (tests) still provisions, it just has no broker to tell. */
export type ProvisionCtx = { db: Db; actor: Actor; services?: Services };

const SERIAL_ALPHABET = 'ABCDEFGHJKLMNPQRSTUVWXYZ23456789'; // no 0/O, 1/I: read off a label without doubt
const serialPart = () => Array.from({ length: 4 }, () => SERIAL_ALPHABET[randomInt(SERIAL_ALPHABET.length)]).join('');
export const newSerial = () => `RN-${serialPart()}-${serialPart()}`;

function requireAdmin(actor: Actor, what: string) {
  if (actor.role !== 'admin') throw forbidden(`Only an admin may ${what}`);
}

function fieldError(path: string, message: string) {
  return new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path, message }]);
}

/** Open relays on the board right now, as far as the server knows. */
function openRelays(services: Services | undefined, controllerId: number): number[] {
  const b = services?.fleet.getById(controllerId);
  return b ? b.relays.map((r, i) => (r.open ? i + 1 : 0)).filter(Boolean) : [];
}

function refuseWhileOpen(services: Services | undefined, c: Controller, what: string) {
  const open = openRelays(services, c.id);
  if (open.length) throw conflict('valves_open', `Relay ${open.join(', ')} of ${c.name} is open; stop the running zones before you ${what}`);
}

async function afterChange(ctx: ProvisionCtx, c: Controller, opts: { disconnect?: boolean } = {}) {
  if (opts.disconnect) ctx.services?.gateway.disconnect(c.serial);
  await ctx.services?.fleet.refresh(c.id);
}

export type ProvisionResult = { controller: ControllerView; serial: string; secret: string; setupSheetUrl: string };

/** POST /api/sites/:id/controllers/provision — Runnel picks the serial and the secret; the secret is in this answer only. */
export async function provisionController(ctx: ProvisionCtx, siteId: number, raw: unknown): Promise<ProvisionResult> {
  const site = await loadVisibleSite(ctx, siteId);
  requireAdmin(ctx.actor, 'provision a controller');
  const input = parse(provisionControllerSchema, raw);
  const secret = generateDeviceSecret();
  const secretHash = await hashDeviceSecret(secret);
  for (let attempt = 0; ; attempt++) {
    const serial = newSerial();
    try {
      const c = await inTx(ctx.db, async (tx) => {
        const [c] = await tx.insert(controllers).values({ ...input, siteId: site.id, serial, secretHash }).returning();
        await recordAudit(tx, ctx.actor, { action: 'controller.provision', entityType: 'controller', entityId: c.id, siteId: site.id, after: controllerView(c) });
        return c;
      });
      await afterChange(ctx, c);
      return { controller: controllerView(c), serial, secret, setupSheetUrl: `/api/controllers/${c.id}/setup-sheet` };
    } catch (e) {
      // 32^8 serials: a clash is rare; try again with another.
      if ((e as { cause?: { code?: string } })?.cause?.code === '23505' && attempt < 5) continue;
      throw e;
    }
  }
}

/** POST /api/controllers/:id/rotate-secret — a new secret; the old one is refused from now on. */
export async function rotateSecret(ctx: ProvisionCtx, id: number): Promise<{ controllerId: number; serial: string; secret: string }> {
  const c = await loadVisibleController(ctx, id);
  requireAdmin(ctx.actor, 'change a controller’s secret');
  if (c.retiredAt) throw conflict('retired', `${c.name} is retired; it has no secret to change`);
  const secret = generateDeviceSecret();
  const secretHash = await hashDeviceSecret(secret);
  await inTx(ctx.db, async (tx) => {
    await tx.update(controllers).set({ secretHash, updatedAt: sql`now()` }).where(eq(controllers.id, id));
    await recordAudit(tx, ctx.actor, { action: 'controller.rotate_secret', entityType: 'controller', entityId: id, siteId: c.siteId, after: { serial: c.serial } });
  });
  // The broker checks the secret against the stored hash; a new hash means the old secret fails
  // from the next connection. Dropping the current one makes that next connection happen now.
  await afterChange(ctx, c, { disconnect: true });
  return { controllerId: id, serial: c.serial, secret };
}

/** POST /api/controllers/:id/retire — it can no longer connect; its history stays. */
export async function retireController(ctx: ProvisionCtx, id: number): Promise<ControllerView> {
  const c = await loadVisibleController(ctx, id);
  requireAdmin(ctx.actor, 'retire a controller');
  if (c.retiredAt) throw conflict('already_retired', `${c.name} was retired on ${c.retiredAt.toISOString().slice(0, 10)}`);
  refuseWhileOpen(ctx.services, c, 'retire it');
  const after = await inTx(ctx.db, async (tx) => {
    const [after] = await tx
      .update(controllers)
      .set({ retiredAt: sql`now()`, secretHash: null, online: false, updatedAt: sql`now()` })
      .where(eq(controllers.id, id))
      .returning();
    await recordAudit(tx, ctx.actor, { action: 'controller.retire', entityType: 'controller', entityId: id, siteId: c.siteId, before: controllerView(c), after: controllerView(after) });
    return after;
  });
  await afterChange(ctx, after, { disconnect: true });
  if (c.online) ctx.services?.bus.publish({ type: 'controller', siteId: c.siteId, controllerId: id, online: false, lastSeenAt: c.lastSeenAt?.toISOString() ?? null });
  return controllerView(after);
}

/** POST /api/controllers/:id/move — to another site, with its zones; they leave the old site's programs and plan. */
export async function moveController(ctx: ProvisionCtx, id: number, raw: unknown): Promise<{ controller: ControllerView; removedFromPrograms: number }> {
  const c = await loadVisibleController(ctx, id);
  requireAdmin(ctx.actor, 'move a controller to another site');
  const { siteId } = parse(moveControllerSchema, raw);
  const [target] = await ctx.db.select({ id: sites.id }).from(sites).where(eq(sites.id, siteId));
  if (!target) throw fieldError('siteId', 'No such site');
  if (siteId === c.siteId) return { controller: controllerView(c), removedFromPrograms: 0 };
  refuseWhileOpen(ctx.services, c, 'move it');
  const result = await inTx(ctx.db, async (tx) => {
    const zs = await tx.select({ id: zones.id }).from(zones).where(eq(zones.controllerId, id));
    const zoneIds = zs.map((z) => z.id);
    let removed = 0;
    if (zoneIds.length) {
      const gone = await tx
        .delete(programZones)
        .where(and(inArray(programZones.zoneId, zoneIds), inArray(programZones.programId, tx.select({ id: programs.id }).from(programs).where(ne(programs.siteId, siteId)))))
        .returning({ id: programZones.id });
      removed = gone.length;
      await tx.delete(zoneMarkers).where(inArray(zoneMarkers.zoneId, zoneIds));
    }
    const [after] = await tx.update(controllers).set({ siteId, updatedAt: sql`now()` }).where(eq(controllers.id, id)).returning();
    await recordAudit(tx, ctx.actor, {
      action: 'controller.move', entityType: 'controller', entityId: id, siteId,
      before: { siteId: c.siteId }, after: { siteId, zonesMoved: zoneIds.length, removedFromPrograms: removed },
    });
    return { after, removed };
  });
  await afterChange(ctx, result.after);
  return { controller: controllerView(result.after), removedFromPrograms: result.removed };
}

export type RelayMapView = { controllerId: number; serial: string; relayCount: number; masterValveRelay: number | null; relays: RelayView[] };

/** GET /api/controllers/:id/relays — every relay of the board and what it is wired to. */
export async function relayMap(ctx: ProvisionCtx, id: number): Promise<RelayMapView> {
  const c = await loadVisibleController(ctx, id);
  const zs = await ctx.db.select({ id: zones.id, name: zones.name, relay: zones.relay }).from(zones).where(eq(zones.controllerId, id));
  const live = ctx.services?.fleet.getById(id);
  const relays: RelayView[] = Array.from({ length: c.relayCount }, (_, i) => {
    const relay = i + 1;
    const z = zs.find((x) => x.relay === relay);
    const use = z ? 'zone' : c.masterValveRelay === relay ? 'master_valve' : 'free';
    return { relay, use, zone: z ? { id: z.id, name: z.name } : null, open: live ? (live.relays[i]?.open ?? null) : null };
  });
  return { controllerId: c.id, serial: c.serial, relayCount: c.relayCount, masterValveRelay: c.masterValveRelay, relays };
}

/**
 * PUT /api/controllers/:id/relays — wire the board's zones to relays in one go. Every zone of
 * the board must be on the map (a zone always has a relay); relays not listed are left free.
 */
export async function setRelayMap(ctx: ProvisionCtx, id: number, raw: unknown): Promise<RelayMapView> {
  const c = await loadVisibleController(ctx, id);
  if (ctx.actor.role !== 'admin' && ctx.actor.role !== 'manager') throw forbidden('Only an admin or manager may re-wire relays');
  const { map } = parse(relayMapSchema, raw);
  const zs = await ctx.db.select({ id: zones.id, name: zones.name, relay: zones.relay }).from(zones).where(eq(zones.controllerId, id));
  const problems: { path: string; message: string }[] = [];
  const relaySeen = new Map<number, number>();
  const zoneSeen = new Map<number, number>();
  map.forEach((m, i) => {
    if (m.relay > c.relayCount) problems.push({ path: `map.${i}.relay`, message: `This controller has ${c.relayCount} relays` });
    if (relaySeen.has(m.relay)) problems.push({ path: `map.${i}.relay`, message: `Relay ${m.relay} is listed twice` });
    relaySeen.set(m.relay, i);
    if (m.zoneId === null) return;
    if (!zs.some((z) => z.id === m.zoneId)) problems.push({ path: `map.${i}.zoneId`, message: `Zone ${m.zoneId} is not on this controller` });
    if (zoneSeen.has(m.zoneId)) problems.push({ path: `map.${i}.zoneId`, message: 'A zone can be on one relay only' });
    zoneSeen.set(m.zoneId, i);
    if (c.masterValveRelay === m.relay) problems.push({ path: `map.${i}.relay`, message: `Relay ${m.relay} drives the master valve` });
  });
  for (const z of zs) {
    if (!zoneSeen.has(z.id)) problems.push({ path: 'map', message: `${z.name} has no relay on the map; every zone of this controller needs one` });
  }
  if (problems.length) throw new AppError(400, 'validation_failed', 'The relay map is not valid', problems);
  refuseWhileOpen(ctx.services, c, 're-wire it');
  const before = Object.fromEntries(zs.map((z) => [z.relay, z.id]));
  const wanted = map.filter((m): m is { relay: number; zoneId: number } => m.zoneId !== null);
  await inTx(ctx.db, async (tx) => {
    // Park the zones on relays no board has, so swapping two relays never trips the unique (controller, relay).
    if (zs.length) await tx.update(zones).set({ relay: sql`${zones.relay} + 100` }).where(eq(zones.controllerId, id));
    for (const m of wanted) await tx.update(zones).set({ relay: m.relay, updatedAt: sql`now()` }).where(eq(zones.id, m.zoneId));
    await recordAudit(tx, ctx.actor, {
      action: 'controller.relays', entityType: 'controller', entityId: id, siteId: c.siteId,
      before: { relays: before }, after: { relays: Object.fromEntries(wanted.map((m) => [m.relay, m.zoneId])) },
    });
  });
  await afterChange(ctx, c);
  return relayMap(ctx, id);
}

/** Whether `secret` is the controller's current one (the setup sheet prints it only then). */
export async function checkSheetSecret(ctx: ProvisionCtx, id: number, raw: unknown): Promise<string> {
  const c = await loadVisibleController(ctx, id);
  requireAdmin(ctx.actor, 'print a controller’s secret');
  const { secret } = parse(setupSheetSchema, raw);
  const ok = c.secretHash ? await argon2.verify(c.secretHash, secret).catch(() => false) : false;
  if (!ok) throw new AppError(400, 'secret_mismatch', 'This is not the controller’s current secret. Rotate the secret to get a new one.');
  return secret;
}

// --- the printable setup sheet ---

const esc = (s: string) => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;').replace(/'/g, '&#39;');

/** Where boards connect, without any credentials the server's own broker URL may carry. */
export function brokerAddress(config: { MQTT_PUBLIC_URL?: string; MQTT_URL?: string; MQTT_HOST: string; MQTT_PORT: number }, services?: Services): string {
  const raw = config.MQTT_PUBLIC_URL ?? config.MQTT_URL ?? `mqtt://${config.MQTT_HOST}:${services?.gateway.port ?? config.MQTT_PORT}`;
  const u = new URL(raw);
  u.username = '';
  u.password = '';
  return u.toString().replace(/\/$/, '');
}

/**
 * One A4/Letter page for the technician at the board: site, serial, broker, relay map, the
 * safety cautions, and a QR code with what the board's setup needs. The secret is printed only
 * when the caller has just been given it (POST with the secret, checked against the hash).
 */
export async function setupSheetHtml(ctx: ProvisionCtx, id: number, opts: { broker: string; firmName: string; secret?: string }): Promise<string> {
  const c = await loadVisibleController(ctx, id);
  if (ctx.actor.role === 'owner') throw forbidden('Setup sheets are for the firm’s staff');
  const site = await loadVisibleSite(ctx, c.siteId);
  const map = await relayMap(ctx, id);
  const payload = JSON.stringify({ runnel: 1, broker: opts.broker, serial: c.serial, ...(opts.secret ? { secret: opts.secret } : {}) });
  const qr = await QRCode.toString(payload, { type: 'svg', errorCorrectionLevel: 'M', margin: 1 });
  const rows = map.relays
    .map((r) => `<tr><td>${r.relay}</td><td>${r.use === 'zone' ? esc(r.zone!.name) : r.use === 'master_valve' ? 'Master valve' : '<span class="free">free</span>'}</td><td></td></tr>`)
    .join('');
  const secretLine = opts.secret
    ? `<code class="secret">${esc(opts.secret)}</code><p class="small">Shown on this sheet only. Keep the sheet with the board’s paperwork or destroy it after setup.</p>`
    : '<p class="small">Not printed: the secret is shown once, when the controller is provisioned or its secret is rotated. Write it here: ______________________________</p>';
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>Setup sheet ${esc(c.serial)}</title><link rel="icon" href="data:,">
<style>
body{font-family:system-ui,sans-serif;color:#1b262c;margin:24px;max-width:760px}
h1{font-size:22px;margin:0 0 4px}h2{font-size:15px;margin:18px 0 6px;border-bottom:1px solid #ccd;padding-bottom:2px}
table{border-collapse:collapse;width:100%}td,th{border:1px solid #bbc;padding:4px 8px;text-align:left;font-size:14px}
th{background:#eef1f4}.grid{display:flex;gap:24px;align-items:flex-start}.qr{width:180px;flex:none}
code{font-size:15px}.secret{display:block;font-size:17px;padding:6px;border:1px dashed #667;word-break:break-all}
.caution{border:2px solid #b3261e;padding:8px 12px;margin-top:18px}.caution strong{color:#b3261e}.small{font-size:12px;color:#4a5860}.free{color:#8a969c}
@media print{body{margin:0}}
</style></head><body>
<h1>${esc(opts.firmName)} — controller setup sheet</h1>
<p class="small">Printed ${esc(new Date().toISOString().slice(0, 16).replace('T', ' '))} UTC. Use your browser’s Print command.</p>
<div class="grid"><div>
<h2>Controller</h2>
<table><tr><th>Site</th><td>${esc(site.name)}${site.address ? `<br><span class="small">${esc(site.address)}</span>` : ''}</td></tr>
<tr><th>Name</th><td>${esc(c.name)}</td></tr><tr><th>Serial (MQTT client id and user name)</th><td><code>${esc(c.serial)}</code></td></tr>
<tr><th>Broker</th><td><code>${esc(opts.broker)}</code></td></tr><tr><th>Relays</th><td>${c.relayCount}${c.hasFlowSensor ? ', flow sensor' : ''}</td></tr></table>
<h2>Secret (MQTT password)</h2>${secretLine}
</div><div class="qr">${qr}<p class="small">Board settings: broker, serial${opts.secret ? ', secret' : ''}.</p></div></div>
<h2>Relay map</h2>
<table><tr><th>Relay</th><th>Wired to</th><th>Checked ✓</th></tr>${rows}</table>
<div class="caution"><p><strong>Caution — mains voltage.</strong> ${esc(MAINS_CAUTION)}</p>
<p><strong>Water and ground.</strong> ${esc(WATER_AND_GROUND_CAUTION)}</p></div>
</body></html>`;
}
