import { Router } from 'express';
import { requireAuth } from '../middleware/auth';
import { openApiDocument } from '../services/openapi';
import type { AppDeps } from '../app';

/** GET /api/openapi.json — for signed-in users (and API tokens). */
export function openapiRoutes(_deps: AppDeps): Router {
  const r = Router();
  r.get('/', requireAuth, (_req, res) => {
    res.json(openApiDocument());
  });
  return r;
}
