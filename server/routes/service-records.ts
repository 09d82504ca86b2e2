import { Router, type Request } from 'express';
import { idParam } from '../contracts/common';
import { PHOTO_MAX_BYTES, PHOTO_MAX_COUNT } from '../contracts/uploads';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { createServiceRecord, listServiceRecords, loadPhoto, mayWriteRecord, photoParams, type RecordTarget } from '../services/service-records';
import { receiveFiles, sendUpload } from './site-plans';
import type { AppDeps } from '../app';

/**
 * Service records: POST /api/zones/:id/service-records, GET/POST /api/controllers/:id/service-records,
 * GET /api/service-records/:id/photos/:n. (GET /api/zones/:id/service-records is in walks.ts and
 * uses the same listing.)
 */
export function serviceRecordRoutes(deps: AppDeps) {
  const { db, config } = deps;
  const ctx = (req: Request) => ({ db, actor: actorOf(req), uploadDir: config.UPLOAD_DIR });
  const id = (params: unknown) => parse(idParam, params).id;
  const photos = receiveFiles('photos', { maxBytes: PHOTO_MAX_BYTES, maxFiles: PHOTO_MAX_COUNT, what: 'A photo' });

  const writer = (target: (req: Request) => RecordTarget) => {
    const r = Router();
    r.use(requireAuth);
    r.post(
      '/:id/service-records',
      async (req, _res, next) => {
        await mayWriteRecord(ctx(req), target(req));
        next();
      },
      photos,
      async (req, res) => {
        const files = Array.isArray(req.files) ? req.files : [];
        res.status(201).json(await createServiceRecord(ctx(req), target(req), req.body ?? {}, files));
      },
    );
    return r;
  };
  const zones = writer((req) => ({ zoneId: id(req.params) }));
  const controllers = writer((req) => ({ controllerId: id(req.params) }));
  controllers.get('/:id/service-records', async (req, res) => {
    res.json({ items: await listServiceRecords(ctx(req), { controllerId: id(req.params) }) });
  });

  const records = Router();
  records.use(requireAuth);
  records.get('/:id/photos/:n', async (req, res) => {
    const { id: recordId, n } = parse(photoParams, req.params);
    const p = await loadPhoto(ctx(req), recordId, n);
    sendUpload(res, p.path, p.contentType, p.etag);
  });
  return { zones, controllers, records };
}
