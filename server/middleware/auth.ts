import type { RequestHandler } from 'express';
import type { Db } from '../db/client';
import { AppError, forbidden, unauthorized } from '../errors';
import { loadActor, type Actor } from '../services/actor';
import { actorForToken } from '../services/api-tokens';
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
      /** Set when the request authenticated with `Authorization: Bearer <API token>`. */
      apiToken?: { id: number };
    }
  }
}

/** Routes about one's own account (profile, preferences, sign-in); an API token has no account. */
const PERSONAL_PATHS = /^\/(auth|me)(\/|$)/;

/**
 * Resolve the caller to an actor on every request, so a disabled user stops at once: an API
 * token (`Authorization: Bearer …`) when one is sent, otherwise the session cookie.
 */
export function attachActor(db: Db): RequestHandler {
  return async (req, _res, next) => {
    const auth = req.get('authorization');
    if (auth !== undefined) {
      const m = /^Bearer\s+(\S+)\s*$/i.exec(auth);
      if (!m) throw new AppError(401, 'bad_token', 'Send the API token as "Authorization: Bearer <token>"');
      const actor = await actorForToken(db, m[1], req.ip);
      if (!actor) throw new AppError(401, 'bad_token', 'This API token is not valid or was revoked');
      if (PERSONAL_PATHS.test(req.path)) throw new AppError(403, 'token_not_allowed', 'API tokens cannot use personal account routes');
      req.actor = actor;
      req.apiToken = { id: actor.tokenId };
      return next();
    }
    const userId = req.session?.userId;
    if (userId) {
      const actor = await loadActor(db, userId, req.ip);
      if (actor) req.actor = actor;
      else await new Promise<void>((r) => req.session.destroy(() => r()));
    }
    next();
  };
}

const SAFE_METHODS = new Set(['GET', 'HEAD', 'OPTIONS']);

/**
 * Cross-site request forgery guard for writes (POST, PUT, PATCH, DELETE) that ride on the
 * session cookie. Browsers send Origin on every cross-site POST (and on same-origin ones), so:
 *  - a request with an API token in Authorization is not a forgery (a page on another site
 *    cannot add that header without a CORS preflight, which Runnel never grants): let through;
 *  - Origin present: it must be this server's own origin (or PUBLIC_URL's), else 403;
 *  - no Origin but a Referer: the Referer's origin must be ours, else 403;
 *  - neither: allowed only when Sec-Fetch-Site is absent, "same-origin" or "none" — that is a
 *    non-browser client (curl, scripts, tests) or the user's own navigation; any browser
 *    that says "cross-site" or "same-site" is refused.
 * SameSite=Lax on the cookie is the second layer.
 */
export function sameOriginWrites(opts: { publicUrl?: string; trustProxy: boolean }): RequestHandler {
  const publicOrigin = opts.publicUrl ? new URL(opts.publicUrl).origin : null;
  const refuse = () =>
    new AppError(403, 'csrf', 'This request came from another site and was refused. Reload Runnel and try again.');
  return (req, _res, next) => {
    if (SAFE_METHODS.has(req.method)) return next();
    if (req.get('authorization')) return next();
    const host = req.get('host');
    const allowed = new Set<string>([`http://${host}`, `https://${host}`]);
    if (publicOrigin) allowed.add(publicOrigin);
    // Behind a trusted proxy, the public host may arrive as X-Forwarded-Host.
    if (opts.trustProxy && req.host) allowed.add(`${req.protocol}://${req.host}`);
    const origin = req.get('origin');
    if (origin !== undefined) return allowed.has(origin) ? next() : next(refuse());
    const referer = req.get('referer');
    if (referer) {
      let from: string | null = null;
      try {
        from = new URL(referer).origin;
      } catch {
        from = null;
      }
      return from && allowed.has(from) ? next() : next(refuse());
    }
    const site = req.get('sec-fetch-site');
    if (site === undefined || site === 'same-origin' || site === 'none') return next();
    next(refuse());
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
