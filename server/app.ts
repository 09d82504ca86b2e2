import express, { type Express, type RequestHandler } from 'express';
import session from 'express-session';
import connectPgSimple from 'connect-pg-simple';
import helmet from 'helmet';
import { pinoHttp } from 'pino-http';
import type { Logger } from 'pino';
import type pg from 'pg';
import fs from 'node:fs';
import path from 'node:path';
import { projectRoot } from './paths';
import type { Config } from './config';
import type { Db } from './db/client';
import { AppError, errorHandler } from './errors';
import { attachActor, sameOriginWrites } from './middleware/auth';
import { apiRouters } from './routes/index';
import type { Clock } from './clock';
import type { Services } from './services/registry';

export type AppDeps = {
  config: Config;
  db: Db;
  pool: pg.Pool;
  log: Logger;
  sessionCookieName: string;
  /** Extra API routers mounted by tests or benchmarks, each under /api. */
  extraRoutes?: { path: string; router: express.Router }[];
  clock?: Clock;
  /** Live parts (dispatcher, gateway, fleet …); absent in plain API tests, which then get 503 on control routes. */
  services?: Services;
  /** Folder with the built client; served with a history fallback when present. */
  clientDir?: string;
};

export type BuiltApp = { app: Express; sessionMiddleware: RequestHandler };

export const defaultClientDir = path.join(projectRoot, 'dist');

/** Build the Express app. Tests and benchmarks call this with their own database and config. */
export function createApp(deps: AppDeps): BuiltApp {
  const { config, db, pool, log } = deps;
  const app = express();
  app.disable('x-powered-by');
  app.set('trust proxy', config.TRUST_PROXY ? 1 : false);

  app.use(
    helmet({
      contentSecurityPolicy: {
        useDefaults: false,
        directives: {
          defaultSrc: ["'self'"],
          scriptSrc: ["'self'"],
          styleSrc: ["'self'", "'unsafe-inline'"],
          imgSrc: ["'self'", 'data:', 'blob:'],
          fontSrc: ["'self'", 'data:'],
          connectSrc: ["'self'"],
          objectSrc: ["'none'"],
          frameAncestors: ["'none'"],
          baseUri: ["'self'"],
          formAction: ["'self'"],
        },
      },
      hsts: config.TRUST_PROXY,
      // Under no-referrer a browser sends "Origin: null" on a form post and the CSRF guard refuses
      // it; the setup-sheet form (secret in the body, new tab) needs the real origin. Same-origin
      // still sends nothing to any other host.
      referrerPolicy: { policy: 'same-origin' },
    }),
  );
  app.use(
    pinoHttp({
      logger: log,
      // No secret, token or session id in a log line: one-time links travel in Referer, tokens in Authorization.
      redact: ['req.headers.cookie', 'req.headers.authorization', 'req.headers.referer', 'res.headers["set-cookie"]', 'req.body', 'req.query.token'],
      autoLogging: { ignore: (req) => !req.url?.startsWith('/api') },
    }),
  );

  const PgStore = connectPgSimple(session);
  const sessionMiddleware = session({
    name: deps.sessionCookieName,
    secret: config.SESSION_SECRET,
    store: new PgStore({ pool, tableName: 'sessions', createTableIfMissing: false, pruneSessionInterval: 60 * 15 }),
    resave: false,
    saveUninitialized: false,
    rolling: false,
    proxy: config.TRUST_PROXY,
    cookie: {
      httpOnly: true,
      sameSite: 'lax',
      secure: config.TRUST_PROXY ? 'auto' : false,
      maxAge: 1000 * 60 * 60 * 12,
    },
  });

  const api = express.Router();
  api.use(sameOriginWrites({ publicUrl: config.PUBLIC_URL, trustProxy: config.TRUST_PROXY }));
  api.use(express.json({ limit: config.JSON_LIMIT }));
  api.use(sessionMiddleware);
  api.use(attachActor(db));
  for (const r of apiRouters) api.use(r.path, r.build(deps));
  for (const extra of deps.extraRoutes ?? []) api.use(extra.path, extra.router);
  api.use((req, _res, next) => next(new AppError(404, 'not_found', `No route ${req.method} /api${req.path}`)));
  app.use('/api', api);

  const clientDir = deps.clientDir ?? defaultClientDir;
  if (fs.existsSync(path.join(clientDir, 'index.html'))) {
    app.use(express.static(clientDir, { index: false, maxAge: '1h' }));
    app.get('/{*splat}', (_req, res) => res.sendFile(path.join(clientDir, 'index.html')));
  }
  app.use(errorHandler(log));
  return { app, sessionMiddleware };
}
