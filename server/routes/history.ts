import { Router } from 'express';
import { idParam } from '../contracts/common';
import { readingsQuerySchema, reviewQuerySchema, runHistoryFilterSchema, runHistoryQuerySchema, waterUseQuerySchema } from '../contracts/history';
import { realClock } from '../clock';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { controllerReadings } from '../history/readings';
import { siteReview } from '../history/review';
import { listRunHistory, prepareRunHistoryCsv } from '../history/runs';
import { siteWaterUse } from '../history/water-use';
import type { AppDeps } from '../app';

/** Run history, its CSV export and water use: /api/history/… (every role, scoped to the sites they see). */
export function historyRoutes(deps: AppDeps) {
  const { db } = deps;
  const now = () => (deps.clock ?? realClock).now();
  const history = Router();
  history.use(requireAuth);
  history.get('/zone-runs', async (req, res) => {
    res.json(await listRunHistory({ db, actor: actorOf(req) }, parse(runHistoryQuerySchema, req.query)));
  });
  history.get('/zone-runs.csv', async (req, res) => {
    const write = await prepareRunHistoryCsv({ db, actor: actorOf(req) }, parse(runHistoryFilterSchema, req.query));
    res.type('text/csv; charset=utf-8').attachment('runnel-zone-runs.csv');
    await write(res);
  });
  history.get('/water-use', async (req, res) => {
    res.json(await siteWaterUse({ db, actor: actorOf(req), now: now() }, parse(waterUseQuerySchema, req.query)));
  });

  /** GET /api/controllers/:id/readings */
  const controllers = Router();
  controllers.get('/:id/readings', requireAuth, async (req, res) => {
    const { id } = parse(idParam, req.params);
    res.json(await controllerReadings({ db, actor: actorOf(req), now: now() }, id, parse(readingsQuerySchema, req.query)));
  });

  /** GET /api/sites/:id/review */
  const sites = Router();
  sites.get('/:id/review', requireAuth, async (req, res) => {
    const { id } = parse(idParam, req.params);
    res.json(await siteReview({ db, actor: actorOf(req), now: now() }, id, parse(reviewQuerySchema, req.query)));
  });
  return { history, controllers, sites };
}
