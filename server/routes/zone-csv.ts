import { Router } from 'express';
import { idParam } from '../contracts/common';
import { ZONE_CSV_MAX_BYTES, zoneImportQuery } from '../contracts/uploads';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { ZONE_CSV_TEMPLATE, exportZonesCsv, importZonesCsv, mayImportZones } from '../services/zone-csv';
import { receiveFiles } from './site-plans';
import type { AppDeps } from '../app';

/** GET /api/zones/template.csv; GET /api/sites/:id/zones.csv; POST /api/sites/:id/zones/import. Mounted at /api. */
export function zoneCsvRoutes({ db }: AppDeps): Router {
  const ctx = (req: Parameters<typeof actorOf>[0]) => ({ db, actor: actorOf(req) });
  const id = (params: unknown) => parse(idParam, params).id;
  const r = Router();
  r.get('/zones/template.csv', requireAuth, (_req, res) => {
    res.type('text/csv; charset=utf-8').attachment('runnel-zones-template.csv').send(ZONE_CSV_TEMPLATE);
  });
  r.get('/sites/:id/zones.csv', requireAuth, async (req, res) => {
    const { filename, csv } = await exportZonesCsv(ctx(req), id(req.params));
    res.type('text/csv; charset=utf-8').attachment(filename).send(csv);
  });
  r.post(
    '/sites/:id/zones/import',
    requireAuth,
    async (req, _res, next) => {
      parse(zoneImportQuery, req.query);
      await mayImportZones(ctx(req), id(req.params));
      next();
    },
    receiveFiles('file', { maxBytes: ZONE_CSV_MAX_BYTES, what: 'The CSV file' }),
    async (req, res) => {
      const { dryRun } = parse(zoneImportQuery, req.query);
      res.json(await importZonesCsv(ctx(req), id(req.params), req.file, dryRun));
    },
  );
  return r;
}
