import express, { Router, type Response } from 'express';
import { idParam } from '../contracts/common';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import {
  brokerAddress, checkSheetSecret, moveController, provisionController, relayMap, retireController, rotateSecret, setRelayMap, setupSheetHtml,
  type ProvisionCtx,
} from '../services/provisioning';
import type { AppDeps } from '../app';

/**
 * Controller provisioning (admin): POST /api/sites/:id/controllers/provision, and under
 * /api/controllers/:id — setup-sheet, rotate-secret, retire, move, relays.
 */
export function provisioningRoutes(deps: AppDeps) {
  const { db, config, services } = deps;
  const ctx = (req: Parameters<typeof actorOf>[0]): ProvisionCtx => ({ db, actor: actorOf(req), services });
  const id = (params: unknown) => parse(idParam, params).id;
  const noStore = (res: Response) => res.set('cache-control', 'no-store');

  const sites = Router();
  sites.use(requireAuth);
  sites.post('/:id/controllers/provision', async (req, res) => {
    noStore(res).status(201).json(await provisionController(ctx(req), id(req.params), req.body));
  });

  const controllers = Router();
  controllers.use(requireAuth);
  const sheet = async (req: express.Request, res: Response, secret?: string) => {
    const html = await setupSheetHtml(ctx(req), id(req.params), { broker: brokerAddress(config, services), firmName: config.FIRM_NAME, secret });
    noStore(res).type('text/html; charset=utf-8').send(html);
  };
  controllers.get('/:id/setup-sheet', (req, res) => sheet(req, res));
  // A form post (target=_blank) or JSON with the secret just shown: the sheet prints it.
  controllers.post('/:id/setup-sheet', express.urlencoded({ extended: false, limit: '2kb' }), async (req, res) => {
    await sheet(req, res, await checkSheetSecret(ctx(req), id(req.params), req.body));
  });
  controllers.post('/:id/rotate-secret', async (req, res) => {
    noStore(res).json(await rotateSecret(ctx(req), id(req.params)));
  });
  controllers.post('/:id/retire', async (req, res) => {
    res.json(await retireController(ctx(req), id(req.params)));
  });
  controllers.post('/:id/move', async (req, res) => {
    res.json(await moveController(ctx(req), id(req.params), req.body));
  });
  controllers.get('/:id/relays', async (req, res) => {
    res.json(await relayMap(ctx(req), id(req.params)));
  });
  controllers.put('/:id/relays', async (req, res) => {
    res.json(await setRelayMap(ctx(req), id(req.params), req.body));
  });
  return { sites, controllers };
}
