import { Router } from 'express';
import { idParam } from '../contracts/common';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { WebhookSender, createWebhook, deleteWebhook, getWebhook, listDeliveries, listWebhooks, updateWebhook } from '../services/webhooks';
import type { AppDeps } from '../app';

const senders = new WeakMap<object, WebhookSender>();

/** The sender of a running server (one per live bus), if the app has live parts. */
export const webhookSenderOf = (deps: Pick<AppDeps, 'services'>) => (deps.services ? senders.get(deps.services.bus) : undefined);

/** /api/webhooks (admin): CRUD and the delivery log. With live parts, also starts the sender. */
export function webhookRoutes(deps: AppDeps): Router {
  const { db, services, config, pool } = deps;
  if (services && !senders.has(services.bus)) {
    const sender = new WebhookSender({
      db, bus: services.bus, log: deps.log.child({ part: 'webhooks' }),
      settings: { maxAttempts: config.WEBHOOK_MAX_ATTEMPTS, retryBaseMs: config.WEBHOOK_RETRY_BASE_MS, timeoutMs: config.WEBHOOK_TIMEOUT_MS },
      // Stops by itself once the server's pool is closing (the runtime's shutdown).
      isClosed: () => pool.ending,
    });
    senders.set(services.bus, sender.start());
  }
  const ctx = (req: Parameters<typeof actorOf>[0]) => ({ db, actor: actorOf(req) });
  const id = (params: unknown) => parse(idParam, params).id;
  const r = Router();
  r.use(requireAuth);
  r.get('/', async (req, res) => {
    res.json({ items: await listWebhooks(ctx(req)) });
  });
  const changed = () => webhookSenderOf(deps)?.invalidate();
  r.post('/', async (req, res) => {
    const out = await createWebhook(ctx(req), req.body);
    changed();
    res.set('cache-control', 'no-store').status(201).json(out);
  });
  r.get('/:id', async (req, res) => {
    res.json(await getWebhook(ctx(req), id(req.params)));
  });
  r.patch('/:id', async (req, res) => {
    const out = await updateWebhook(ctx(req), id(req.params), req.body);
    changed();
    res.set('cache-control', 'no-store').json(out);
  });
  r.delete('/:id', async (req, res) => {
    await deleteWebhook(ctx(req), id(req.params));
    changed();
    res.status(204).end();
  });
  r.get('/:id/deliveries', async (req, res) => {
    res.json({ items: await listDeliveries(ctx(req), id(req.params), req.query) });
  });
  return r;
}
