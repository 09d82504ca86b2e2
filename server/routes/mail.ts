import { Router } from 'express';
import { z } from 'zod';
import { AppError, notFound } from '../errors';
import { actorOf, requireAuth, requireRole } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { watchOf } from '../alerts/watch';
import { getMailPreferences, putMailPreferences } from '../mail/preferences';
import type { AppDeps } from '../app';

const outboxQuery = z.object({ to: z.string().max(254).optional(), limit: z.coerce.number().int().min(1).max(1000).default(100) });

/** GET/PUT /api/me/mail-preferences and, in demo mode for admins, GET /api/mail/outbox. */
export function mailRoutes(deps: AppDeps) {
  const { db } = deps;
  const me = Router();
  me.get('/mail-preferences', requireAuth, async (req, res) => {
    res.json(await getMailPreferences(db, actorOf(req)));
  });
  me.put('/mail-preferences', requireAuth, async (req, res) => {
    res.json(await putMailPreferences(db, actorOf(req), req.body));
  });

  const mail = Router();
  mail.use((_req, _res, next) => {
    if (!deps.config.RUNNEL_DEMO) throw notFound('Page');
    next();
  });
  mail.use(requireRole('admin'));
  mail.get('/outbox', (req, res) => {
    const q = parse(outboxQuery, req.query);
    const smtp = watchOf(deps.services)?.fakeSmtp;
    if (!smtp) throw new AppError(503, 'fake_smtp_not_running', 'The local fake SMTP server is not running on this server (SMTP_URL points elsewhere)');
    const all = smtp.messages().reverse();
    const items = (q.to ? all.filter((m) => m.envelopeTo.includes(q.to!) || m.to.includes(q.to!)) : all).slice(0, q.limit);
    res.json({ smtpUrl: smtp.url, kept: all.length, items });
  });
  return { me, mail };
}
