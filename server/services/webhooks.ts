import { createHmac, randomBytes, randomUUID } from 'node:crypto';
import { and, desc, eq, sql } from 'drizzle-orm';
import type { Logger } from 'pino';
import { inTx, type Db } from '../db/client';
import { sites, webhookDeliveries, webhooks, type Webhook, type WebhookDelivery } from '../db/schema/index';
import {
  createWebhookSchema, deliveriesQuerySchema, updateWebhookSchema, webhookEvents,
  type WebhookDeliveryView, type WebhookEvent, type WebhookView,
} from '../contracts/webhooks';
import { parse } from '../middleware/validate';
import { AppError, forbidden, notFound } from '../errors';
import type { LiveBus } from '../live/bus';
import type { LiveEvent } from '../live/events';
import type { Actor } from './actor';
import { recordAudit } from './audit';

type Ctx = { db: Db; actor: Actor };

const newSecret = () => `whsec_${randomBytes(32).toString('base64url')}`;

/** `sha256=<hex>`: HMAC-SHA256 of the exact bytes of the body, keyed with the webhook's secret. */
export const signature = (secret: string, body: string) => `sha256=${createHmac('sha256', secret).update(body).digest('hex')}`;

function requireAdmin(actor: Actor) {
  if (actor.role !== 'admin') throw forbidden('Only an admin may manage webhooks');
}

function view(w: Webhook): WebhookView {
  return {
    id: w.id, siteId: w.siteId, url: w.url, events: w.events as WebhookEvent[], description: w.description, enabled: w.enabled,
    createdAt: w.createdAt.toISOString(), updatedAt: w.updatedAt.toISOString(),
  };
}

function deliveryView(d: WebhookDelivery): WebhookDeliveryView {
  const iso = (x: Date | null) => x?.toISOString() ?? null;
  return {
    id: d.id, deliveryKey: d.deliveryKey, event: d.event, state: d.state, attempts: d.attempts, lastStatus: d.lastStatus, lastError: d.lastError,
    nextAttemptAt: d.state === 'pending' ? iso(d.nextAttemptAt) : null, createdAt: d.createdAt.toISOString(), lastAttemptAt: iso(d.lastAttemptAt),
    deliveredAt: iso(d.deliveredAt), payload: d.payload,
  };
}

async function checkSite(db: Db, siteId: number | null | undefined) {
  if (siteId == null) return;
  const [s] = await db.select({ id: sites.id }).from(sites).where(eq(sites.id, siteId));
  if (!s) throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'siteId', message: 'No such site' }]);
}

async function load(db: Db, id: number) {
  const [w] = await db.select().from(webhooks).where(eq(webhooks.id, id));
  if (!w) throw notFound('Webhook');
  return w;
}

export async function listWebhooks({ db, actor }: Ctx) {
  requireAdmin(actor);
  return (await db.select().from(webhooks).orderBy(webhooks.id)).map(view);
}

export async function getWebhook({ db, actor }: Ctx, id: number) {
  requireAdmin(actor);
  return view(await load(db, id));
}

/** POST /api/webhooks — the signing secret is in this answer only. */
export async function createWebhook(ctx: Ctx, raw: unknown): Promise<{ webhook: WebhookView; secret: string }> {
  requireAdmin(ctx.actor);
  const input = parse(createWebhookSchema, raw);
  await checkSite(ctx.db, input.siteId);
  const secret = newSecret();
  const w = await inTx(ctx.db, async (tx) => {
    const [w] = await tx.insert(webhooks).values({ ...input, secret, createdBy: ctx.actor.userId || null }).returning();
    await recordAudit(tx, ctx.actor, { action: 'webhook.create', entityType: 'webhook', entityId: w.id, siteId: w.siteId, after: view(w) });
    return w;
  });
  return { webhook: view(w), secret };
}

/** PATCH /api/webhooks/:id — `rotateSecret: true` answers with the new secret. */
export async function updateWebhook(ctx: Ctx, id: number, raw: unknown): Promise<{ webhook: WebhookView; secret?: string }> {
  requireAdmin(ctx.actor);
  const before = await load(ctx.db, id);
  const { rotateSecret, ...input } = parse(updateWebhookSchema, raw);
  await checkSite(ctx.db, input.siteId);
  const secret = rotateSecret ? newSecret() : undefined;
  const w = await inTx(ctx.db, async (tx) => {
    const [w] = await tx.update(webhooks).set({ ...input, ...(secret ? { secret } : {}), updatedAt: sql`now()` }).where(eq(webhooks.id, id)).returning();
    await recordAudit(tx, ctx.actor, {
      action: 'webhook.update', entityType: 'webhook', entityId: id, siteId: w.siteId,
      before: view(before), after: { ...view(w), secretRotated: !!secret },
    });
    return w;
  });
  return { webhook: view(w), ...(secret ? { secret } : {}) };
}

export async function deleteWebhook(ctx: Ctx, id: number) {
  requireAdmin(ctx.actor);
  const before = await load(ctx.db, id);
  await inTx(ctx.db, async (tx) => {
    await tx.delete(webhooks).where(eq(webhooks.id, id));
    await recordAudit(tx, ctx.actor, { action: 'webhook.delete', entityType: 'webhook', entityId: id, siteId: before.siteId, before: view(before) });
  });
}

export async function listDeliveries(ctx: Ctx, id: number, raw: unknown) {
  requireAdmin(ctx.actor);
  await load(ctx.db, id);
  const { limit } = parse(deliveriesQuerySchema, raw);
  const rows = await ctx.db.select().from(webhookDeliveries).where(eq(webhookDeliveries.webhookId, id)).orderBy(desc(webhookDeliveries.id)).limit(limit);
  return rows.map(deliveryView);
}

const occurredAt = (e: LiveEvent) => {
  const at = (e as { at?: unknown }).at;
  return typeof at === 'string' ? at : new Date().toISOString();
};

export type SenderSettings = { maxAttempts: number; retryBaseMs: number; timeoutMs: number };

/**
 * Sends live events to the webhooks that want them. Each event becomes one delivery row per
 * webhook, tried at once and then again after retryBase, 2×, 4× … until the receiver answers 2xx
 * or maxAttempts is reached. A row is claimed (next_attempt_at pushed ahead) before each try,
 * so two instances never send the same try; rows left pending by a restart are picked up by
 * the sweep. Events come from `subscribe` (this instance's own), so each is sent once.
 */
export class WebhookSender {
  private unsubscribe: (() => void) | null = null;
  private sweepTimer: NodeJS.Timeout | null = null;
  private timers = new Set<NodeJS.Timeout>();
  private inflight = new Set<Promise<unknown>>();

  constructor(private d: { db: Db; bus: LiveBus; log: Logger; settings: SenderSettings; isClosed: () => boolean }) {}

  start() {
    this.unsubscribe = this.d.bus.subscribe((e) => {
      if (!(webhookEvents as readonly string[]).includes(e.type)) return;
      if (this.d.isClosed()) return this.stop();
      this.track(this.enqueue(e));
    });
    this.sweepTimer = setInterval(() => this.track(this.sweep()), Math.max(1000, Math.min(30_000, this.d.settings.retryBaseMs)));
    this.sweepTimer.unref();
    return this;
  }

  stop() {
    this.unsubscribe?.();
    this.unsubscribe = null;
    if (this.sweepTimer) clearInterval(this.sweepTimer);
    for (const t of this.timers) clearTimeout(t);
    this.timers.clear();
  }

  /** Resolves once every try started so far has finished (tests). */
  async idle() {
    while (this.inflight.size) await Promise.allSettled([...this.inflight]);
  }

  private track(p: Promise<unknown>) {
    const q = p.catch((err) => {
      if (!this.d.isClosed()) this.d.log.warn({ err: { message: (err as Error)?.message } }, 'webhook delivery step failed');
    });
    if (this.d.isClosed()) return this.stop();
    this.inflight.add(q);
    void q.finally(() => this.inflight.delete(q));
  }

  private later(id: number, ms: number) {
    const t = setTimeout(() => {
      this.timers.delete(t);
      this.track(this.attempt(id));
    }, ms);
    t.unref();
    this.timers.add(t);
  }

  private hooks: { at: number; rows: Promise<Webhook[]> } | null = null;

  /** Forget the cached list of webhooks (after a change through this instance's API). */
  invalidate() {
    this.hooks = null;
  }

  /** Enabled webhooks, read at most every few seconds: events are frequent, webhooks rarely change. */
  private enabledHooks(): Promise<Webhook[]> {
    if (!this.hooks || Date.now() - this.hooks.at > 5000) {
      const rows = Promise.resolve(this.d.db.select().from(webhooks).where(eq(webhooks.enabled, true)));
      rows.catch(() => (this.hooks = null));
      this.hooks = { at: Date.now(), rows };
    }
    return this.hooks.rows;
  }

  private async enqueue(e: LiveEvent) {
    const hooks = (await this.enabledHooks()).filter((h) => h.events.includes(e.type) && (h.siteId === null || h.siteId === e.siteId));
    for (const h of hooks) {
      const deliveryKey = randomUUID();
      const payload = { id: deliveryKey, event: e.type, siteId: e.siteId, sentBy: 'runnel', occurredAt: occurredAt(e), data: e };
      const [d] = await this.d.db
        .insert(webhookDeliveries)
        .values({ webhookId: h.id, deliveryKey, event: e.type, payload, nextAttemptAt: new Date() })
        .returning({ id: webhookDeliveries.id });
      this.track(this.attempt(d.id));
    }
  }

  private async sweep() {
    const due = await this.d.db
      .select({ id: webhookDeliveries.id })
      .from(webhookDeliveries)
      .where(and(eq(webhookDeliveries.state, 'pending'), sql`${webhookDeliveries.nextAttemptAt} <= now()`))
      .limit(100);
    for (const d of due) this.track(this.attempt(d.id));
  }

  /** One try of one delivery. */
  private async attempt(id: number) {
    if (this.d.isClosed()) return;
    const { maxAttempts, retryBaseMs, timeoutMs } = this.d.settings;
    const lease = Math.max(timeoutMs * 2, 10_000);
    const claimed = await this.d.db.execute<{ id: number }>(sql`
      update webhook_deliveries set next_attempt_at = now() + make_interval(secs => ${lease / 1000})
      where id = ${id} and state = 'pending' and next_attempt_at <= now() returning id`);
    if (claimed.rows.length === 0) return;
    const [row] = await this.d.db
      .select({ d: webhookDeliveries, h: webhooks })
      .from(webhookDeliveries)
      .innerJoin(webhooks, eq(webhookDeliveries.webhookId, webhooks.id))
      .where(eq(webhookDeliveries.id, id));
    if (!row) return;
    const body = JSON.stringify(row.d.payload);
    let status: number | null = null;
    let error: string | null = null;
    try {
      const res = await fetch(row.h.url, {
        method: 'POST',
        redirect: 'manual',
        signal: AbortSignal.timeout(timeoutMs),
        headers: {
          'content-type': 'application/json',
          'user-agent': 'Runnel-Webhooks/1',
          'x-runnel-event': row.d.event,
          'x-runnel-delivery': row.d.deliveryKey,
          'x-runnel-signature': signature(row.h.secret, body),
        },
        body,
      });
      status = res.status;
      await res.body?.cancel().catch(() => {});
      if (status < 200 || status > 299) error = `The receiver answered ${status}`;
    } catch (err) {
      const e = err as Error & { cause?: { code?: string } };
      error = e.name === 'TimeoutError' ? `No answer within ${timeoutMs} ms` : `Could not reach the receiver${e.cause?.code ? ` (${e.cause.code})` : ''}`;
    }
    const attempts = row.d.attempts + 1;
    const ok = error === null;
    const giveUp = !ok && attempts >= maxAttempts;
    const delay = retryBaseMs * 2 ** (attempts - 1);
    await this.d.db
      .update(webhookDeliveries)
      .set({
        attempts, lastStatus: status, lastError: error, lastAttemptAt: new Date(),
        state: ok ? 'delivered' : giveUp ? 'failed' : 'pending',
        deliveredAt: ok ? new Date() : null,
        nextAttemptAt: ok || giveUp ? null : sql`now() + make_interval(secs => ${delay / 1000})`,
      })
      .where(eq(webhookDeliveries.id, id));
    if (!ok && !giveUp) this.later(id, delay + 25);
  }
}
