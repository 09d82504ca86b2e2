import { Router, type RequestHandler } from 'express';
import rateLimit, { ipKeyGenerator } from 'express-rate-limit';
import { idParam } from '../contracts/common';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { resetRequestSchema } from '../contracts/users';
import { watchOf } from '../alerts/watch';
import { createNullMailer, createSmtpMailer, type Mailer } from '../mail/mailer';
import { listUsers, updateUser, type PeopleEvents } from '../services/users';
import { acceptInvite, confirmReset, invite, requestReset, resendInvite, revokeInvite, type AccountMail } from '../services/invitations';
import type { AppDeps } from '../app';

/** A limiter that answers in Runnel's error shape. */
export function limiter(limit: number, windowMs: number, message: string, key?: (req: Parameters<RequestHandler>[0]) => string): RequestHandler {
  return rateLimit({
    windowMs,
    limit,
    standardHeaders: 'draft-8',
    legacyHeaders: false,
    keyGenerator: key ?? ((req) => ipKeyGenerator(req.ip ?? '')),
    handler: (_req, res) => res.status(429).json({ error: { code: 'rate_limited', message, details: null } }),
  });
}

/**
 * Account mail goes the way alert mail goes: the running server's mailer (SMTP_URL, or the local
 * fake SMTP server). An app built without the live parts (API tests) mails SMTP_URL itself.
 */
function accountMailOf(deps: AppDeps): () => AccountMail {
  let own: Mailer | null = null;
  return () => {
    const ctx = watchOf(deps.services)?.mail.ctx;
    const log = deps.log.child({ part: 'account-mail' });
    if (ctx) return { send: (m) => ctx.mailer.send(m), baseUrl: ctx.baseUrl, firmName: ctx.firmName, log };
    const c = deps.config;
    own ??= c.SMTP_URL ? createSmtpMailer({ url: c.SMTP_URL, from: c.MAIL_FROM, local: c.NODE_ENV !== 'production', log }) : createNullMailer();
    const baseUrl = (c.PUBLIC_URL ?? `http://${c.HOST}:${c.PORT}`).replace(/\/+$/, '');
    return { send: (m) => own!.send(m), baseUrl, firmName: c.FIRM_NAME, log };
  };
}

function peopleEventsOf(deps: AppDeps): PeopleEvents | undefined {
  const bus = deps.services?.bus;
  if (!bus) return undefined;
  return {
    userDisabled: (userId) => bus.publish({ type: 'user-disabled', siteId: 0, userId }),
    userChanged: (userId) => bus.publish({ type: 'user-changed', siteId: 0, userId }),
    userSignedOut: (userId) => bus.publish({ type: 'user-signed-out', siteId: 0, userId }),
  };
}

/** /api/users (admin) and the account routes under /api/auth that need no session. */
export function userRoutes(deps: AppDeps) {
  const { db, config } = deps;
  const mail = accountMailOf(deps);
  const events = peopleEventsOf(deps);
  const settings = { inviteTtlHours: config.INVITE_TTL_HOURS, resetTtlMinutes: config.RESET_TTL_MINUTES };
  const ctx = (req: Parameters<typeof actorOf>[0]) => ({ db, actor: actorOf(req), events, mail: mail(), settings });
  const id = (params: unknown) => parse(idParam, params).id;

  const people = Router();
  people.use(requireAuth);
  people.get('/', async (req, res) => {
    res.json({ items: await listUsers(ctx(req)) });
  });
  people.post('/invitations', async (req, res) => {
    res.status(201).json(await invite(ctx(req), req.body));
  });
  people.post('/:id/invitation/resend', async (req, res) => {
    res.json(await resendInvite(ctx(req), id(req.params)));
  });
  people.delete('/:id/invitation', async (req, res) => {
    res.json(await revokeInvite(ctx(req), id(req.params)));
  });
  people.patch('/:id', async (req, res) => {
    res.json(await updateUser(ctx(req), id(req.params), req.body));
  });

  const fifteenMinutes = 15 * 60_000;
  const resetLimit = limiter(
    config.RESET_RATE_LIMIT, fifteenMinutes, 'Too many password-reset requests. Wait a few minutes and try again.',
    (req) => `${ipKeyGenerator(req.ip ?? '')}|${String(req.body?.email ?? '').trim().toLowerCase()}`,
  );
  const linkLimit = limiter(config.TOKEN_RATE_LIMIT, fifteenMinutes, 'Too many attempts with one-time links. Wait a few minutes and try again.');

  const account = Router();
  account.post('/accept-invite', linkLimit, async (req, res) => {
    res.json(await acceptInvite(db, req.body, req.ip));
  });
  account.post('/password-reset', resetLimit, async (req, res) => {
    // Checked here so a malformed body still gets a 400; the rest happens after the answer.
    parse(resetRequestSchema, req.body);
    res.status(202).json({ accepted: true, message: 'If this address belongs to an active account, a link to choose a new password is on its way.' });
    void requestReset(db, mail(), settings, req.body, req.ip).catch((err) => deps.log.warn({ err: { message: err?.message } }, 'password reset failed'));
  });
  account.post('/password-reset/confirm', linkLimit, async (req, res) => {
    const done = await confirmReset(db, req.body, req.ip);
    events?.userSignedOut(done.userId); // every session ended: close their live sockets too
    res.json({ email: done.email });
  });
  return { people, account };
}
