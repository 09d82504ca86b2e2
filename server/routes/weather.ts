import { Router, type RequestHandler } from 'express';
import multer from 'multer';
import { idParam } from '../contracts/common';
import { CSV_MAX_BYTES, importQuery, weatherDateParam } from '../contracts/weather';
import { actorOf, requireAuth } from '../middleware/auth';
import { parse } from '../middleware/validate';
import { AppError } from '../errors';
import { deleteWeatherDay, listWeather, loadWritableSite, saveWeatherDay, type Ctx } from '../services/weather';
import { CSV_TEMPLATE, importWeatherCsv } from '../services/weather-import';
import { fetchSiteWeather } from '../services/weather-fetch';
import { loadWeatherConfig } from '../weather/config';
import type { AppDeps } from '../app';

const upload = multer({
  storage: multer.memoryStorage(),
  limits: { fileSize: CSV_MAX_BYTES, files: 1, fields: 10, parts: 12 },
}).single('file');

/** Read the multipart upload into memory; every upload problem becomes a 400 with a plain message. */
const receiveCsv: RequestHandler = (req, res, next) => {
  upload(req, res, (err: unknown) => {
    if (!err) return next();
    if (err instanceof multer.MulterError) {
      if (err.code === 'LIMIT_FILE_SIZE') {
        return next(new AppError(400, 'file_too_large', `The file is larger than ${CSV_MAX_BYTES / 1024 / 1024} MB`));
      }
      if (err.code === 'LIMIT_UNEXPECTED_FILE' || err.code === 'LIMIT_FILE_COUNT') {
        return next(new AppError(400, 'bad_upload', 'Send one CSV file in the form field "file"'));
      }
      return next(new AppError(400, 'bad_upload', `The upload could not be read: ${err.message}`));
    }
    next(new AppError(400, 'bad_upload', 'The upload could not be read as multipart/form-data'));
  });
};

/**
 * Weather per site: list, type in a day, delete a day, import a CSV, fetch from the weather
 * service; plus the CSV template. Mounted at /api.
 */
export function weatherRoutes(deps: AppDeps): Router {
  const { db } = deps;
  const settings = loadWeatherConfig(process.env, deps.config as unknown as Record<string, unknown>);
  const now = () => (deps.clock ? deps.clock.now() : Date.now());
  const ctx = (req: Parameters<typeof actorOf>[0]): Ctx => ({ db, actor: actorOf(req), now });
  const siteId = (params: unknown) => parse(idParam, params).id;
  const r = Router();

  r.get('/weather/template.csv', requireAuth, (_req, res) => {
    res.type('text/csv; charset=utf-8').attachment('runnel-weather-template.csv').send(CSV_TEMPLATE);
  });
  r.get('/sites/:id/weather', requireAuth, async (req, res) => {
    res.json(await listWeather(ctx(req), siteId(req.params), req.query));
  });
  r.put('/sites/:id/weather/:date', requireAuth, async (req, res) => {
    const { id, date } = parse(weatherDateParam, req.params);
    res.json(await saveWeatherDay(ctx(req), id, date, req.body));
  });
  r.delete('/sites/:id/weather/:date', requireAuth, async (req, res) => {
    const { id, date } = parse(weatherDateParam, req.params);
    await deleteWeatherDay(ctx(req), id, date);
    res.status(204).end();
  });
  r.post(
    '/sites/:id/weather/import',
    requireAuth,
    // Refuse a stranger's site or role before reading a 5 MB body.
    async (req, _res, next) => {
      parse(importQuery, req.query);
      await loadWritableSite(ctx(req), siteId(req.params));
      next();
    },
    receiveCsv,
    async (req, res) => {
      const { dryRun } = parse(importQuery, req.query);
      res.json(await importWeatherCsv(ctx(req), siteId(req.params), req.file, dryRun));
    },
  );
  r.post('/sites/:id/weather/fetch', requireAuth, async (req, res) => {
    res.json(
      await fetchSiteWeather(ctx(req), siteId(req.params), req.body, {
        url: settings.WEATHER_URL,
        timeoutMs: settings.WEATHER_TIMEOUT_MS,
      }),
    );
  });
  return r;
}
