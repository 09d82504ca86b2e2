import type { RequestHandler } from 'express';
import type { Db } from '../db/client';
import { forbidden, unauthorized } from '../errors';
import { loadActor, type Actor } from '../services/actor';
import type { Role } from '../contracts/common';

declare module 'express-session' {
  interface SessionData {
    userId?: number;
  }
}
declare global {
  // eslint-disable-next-line @typescript-eslint/no-namespace
  namespace Express {
    interface Request {
      actor?: Actor;
    }
  }
}

/** Resolve the session to an actor on every request, so a disabled user stops at once. */
export function attachActor(db: Db): RequestHandler {
  return async (req, _res, next) => {
    const userId = req.session?.userId;
    if (userId) {
      const actor = await loadActor(db, userId, req.ip);
      if (actor) req.actor = actor;
      else await new Promise<void>((r) => req.session.destroy(() => r()));
    }
    next();
  };
}

export const requireAuth: RequestHandler = (req, _res, next) => {
  if (!req.actor) throw unauthorized();
  next();
};

export function requireRole(...roles: Role[]): RequestHandler {
  return (req, _res, next) => {
    if (!req.actor) throw unauthorized();
    if (!roles.includes(req.actor.role)) throw forbidden();
    next();
  };
}

export function actorOf(req: { actor?: Actor }): Actor {
  if (!req.actor) throw unauthorized();
  return req.actor;
}
