import { Router } from 'express';
import rateLimit, { ipKeyGenerator } from 'express-rate-limit';
import { eq, sql } from 'drizzle-orm';
import { signInSchema, updateMeSchema } from '../contracts/auth';
import { users } from '../db/schema/index';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { meOf, normaliseEmail, verifySignIn } from '../services/auth';
import { errorBody } from '../errors';
import { recordAudit } from '../services/audit';
import type { AppDeps } from '../app';

export function authRoutes(deps: AppDeps): Router {
  const r = Router();
  const { db } = deps;
  const signInLimit = rateLimit({
    windowMs: 60_000,
    limit: deps.config.LOGIN_RATE_LIMIT,
    standardHeaders: 'draft-8',
    legacyHeaders: false,
    // The e-mail as sign-in reads it, so " Admin@X " counts against the same limit as "admin@x".
    keyGenerator: (req) => `${ipKeyGenerator(req.ip ?? '')}|${normaliseEmail(req.body?.email)}`,
    handler: (_req, res) => res.status(429).json(errorBody('rate_limited', 'Too many sign-in attempts. Wait a minute and try again.')),
  });

  r.post('/sign-in', signInLimit, async (req, res) => {
    const { email, password } = parse(signInSchema, req.body);
    const u = await verifySignIn(db, email, password, req.ip);
    // A new session id at sign-in, so a fixed id planted before sign-in is worthless.
    await new Promise<void>((ok, fail) => req.session.regenerate((e) => (e ? fail(e) : ok())));
    req.session.userId = u.id;
    await new Promise<void>((ok, fail) => req.session.save((e) => (e ? fail(e) : ok())));
    res.json(await meOf(db, u.id, deps.config.RUNNEL_DEMO));
  });

  r.post('/sign-out', async (req, res) => {
    const actor = req.actor;
    await new Promise<void>((ok) => req.session.destroy(() => ok()));
    res.clearCookie(deps.sessionCookieName);
    if (actor) await recordAudit(db, actor, { action: 'auth.sign_out', entityType: 'user', entityId: actor.userId });
    res.status(204).end();
  });

  r.get('/me', requireAuth, async (req, res) => {
    res.json(await meOf(db, actorOf(req).userId, deps.config.RUNNEL_DEMO));
  });

  r.patch('/me', requireAuth, async (req, res) => {
    const body = parse(updateMeSchema, req.body);
    const actor = actorOf(req);
    if (Object.keys(body).length) {
      await db.update(users).set({ ...body, updatedAt: sql`now()` }).where(eq(users.id, actor.userId));
      await recordAudit(db, actor, { action: 'user.preferences', entityType: 'user', entityId: actor.userId, after: body });
    }
    res.json(await meOf(db, actor.userId, deps.config.RUNNEL_DEMO));
  });
  return r;
}
