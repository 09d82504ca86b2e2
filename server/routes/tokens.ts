import { Router } from 'express';
import { idParam } from '../contracts/common';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { createToken, listTokens, revokeToken } from '../services/api-tokens';
import { limiter } from './users';
import type { AppDeps } from '../app';

/** /api/tokens (admin): list, create (the token is in that answer only), revoke. */
export function tokenRoutes({ db, config }: AppDeps): Router {
  const ctx = (req: Parameters<typeof actorOf>[0]) => ({ db, actor: actorOf(req) });
  const r = Router();
  r.use(requireAuth);
  r.get('/', async (req, res) => {
    res.json({ items: await listTokens(ctx(req)) });
  });
  r.post('/', limiter(config.TOKEN_RATE_LIMIT, 15 * 60_000, 'Too many tokens made from this address. Wait a few minutes.'), async (req, res) => {
    res.set('cache-control', 'no-store').status(201).json(await createToken(ctx(req), req.body));
  });
  r.delete('/:id', async (req, res) => {
    await revokeToken(ctx(req), parse(idParam, req.params).id);
    res.status(204).end();
  });
  return r;
}
