import fs from 'node:fs';
import { Router, type RequestHandler } from 'express';
import multer from 'multer';
import { idParam } from '../contracts/common';
import { PLAN_MAX_BYTES } from '../contracts/uploads';
import { AppError } from '../errors';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { loadPlan, mayUploadPlan, planWithMarkers, putMarkers, storedPath, uploadPlan } from '../services/site-plans';
import type { AppDeps } from '../app';

const MB = (n: number) => `${Math.round(n / 1024 / 1024)} MB`;

/**
 * Read a multipart upload into memory (nothing touches the disk before it is checked). Every
 * upload problem becomes a 400 with a plain message. `maxFiles` > 1 reads an array field.
 */
export function receiveFiles(field: string, opts: { maxBytes: number; maxFiles?: number; what: string }): RequestHandler {
  const maxFiles = opts.maxFiles ?? 1;
  const m = multer({ storage: multer.memoryStorage(), limits: { fileSize: opts.maxBytes, files: maxFiles, fields: 10, parts: maxFiles + 10, fieldSize: 32 * 1024 } });
  const upload = maxFiles > 1 ? m.array(field, maxFiles) : m.single(field);
  return (req, res, next) => {
    upload(req, res, (err: unknown) => {
      if (!err) return next();
      if (err instanceof multer.MulterError) {
        if (err.code === 'LIMIT_FILE_SIZE') return next(new AppError(400, 'file_too_large', `${opts.what} is larger than ${MB(opts.maxBytes)}; nothing was stored`));
        if (err.code === 'LIMIT_FILE_COUNT' || (err.code === 'LIMIT_UNEXPECTED_FILE' && maxFiles > 1)) {
          return next(new AppError(400, 'too_many_files', `Send at most ${maxFiles} file${maxFiles > 1 ? 's' : ''} in the form field "${field}"`));
        }
        if (err.code === 'LIMIT_UNEXPECTED_FILE') return next(new AppError(400, 'bad_upload', `Send the file in the form field "${field}"`));
        return next(new AppError(400, 'bad_upload', 'The upload could not be read'));
      }
      next(new AppError(400, 'bad_upload', 'The upload could not be read as multipart/form-data'));
    });
  };
}

/** Headers for serving an upload back: its checked type, never sniffed, never run as a page. */
export function sendUpload(res: Parameters<RequestHandler>[1], file: string, contentType: string, etag: string) {
  res.set({
    'content-type': contentType,
    'x-content-type-options': 'nosniff',
    'content-security-policy': "default-src 'none'; sandbox",
    'content-disposition': 'inline',
    'cache-control': 'private, max-age=0, must-revalidate',
    etag: `"${etag}"`,
  });
  const stream = fs.createReadStream(file);
  stream.on('error', () => {
    if (!res.headersSent) res.status(404).json({ error: { code: 'not_found', message: 'The stored file is missing', details: null } });
    else res.end();
  });
  stream.pipe(res);
}

/** /api/sites/:id/plan (POST upload, GET image) and /api/sites/:id/plan/markers (GET, PUT). */
export function sitePlanRoutes(deps: AppDeps): Router {
  const { db, config } = deps;
  const ctx = (req: Parameters<typeof actorOf>[0]) => ({ db, actor: actorOf(req), uploadDir: config.UPLOAD_DIR });
  const id = (params: unknown) => parse(idParam, params).id;
  const r = Router();
  r.use(requireAuth);
  r.post(
    '/:id/plan',
    async (req, _res, next) => {
      await mayUploadPlan(ctx(req), id(req.params)); // refuse a stranger before reading 10 MB
      next();
    },
    receiveFiles('file', { maxBytes: PLAN_MAX_BYTES, what: 'The plan' }),
    async (req, res) => {
      res.status(201).json(await uploadPlan(ctx(req), id(req.params), req.file, PLAN_MAX_BYTES));
    },
  );
  r.get('/:id/plan', async (req, res) => {
    const p = await loadPlan(ctx(req), id(req.params));
    if (req.get('if-none-match') === `"${p.sha256}"`) return void res.status(304).end();
    sendUpload(res, storedPath(config.UPLOAD_DIR, 'plans', p.storedName), p.contentType, p.sha256);
  });
  r.get('/:id/plan/markers', async (req, res) => {
    res.json(await planWithMarkers(ctx(req), id(req.params)));
  });
  r.put('/:id/plan/markers', async (req, res) => {
    res.json(await putMarkers(ctx(req), id(req.params), req.body));
  });
  return r;
}
