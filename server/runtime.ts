import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { pino, type Logger } from 'pino';
import { createApp } from './app';
import type { Config } from './config';
import { createDb, type DbHandle } from './db/client';

export type Runtime = {
  config: Config;
  log: Logger;
  dbh: DbHandle;
  server: http.Server;
  url: string;
  close: () => Promise<void>;
};

export type RuntimeOptions = {
  log?: Logger;
  clientDir?: string;
};

/** Wire every part of Runnel together and listen. index.ts, the e2e tests and the benchmarks use this. */
export async function startRuntime(config: Config, opts: RuntimeOptions = {}): Promise<Runtime> {
  const log = opts.log ?? pino({ level: config.LOG_LEVEL ?? (config.NODE_ENV === 'test' ? 'silent' : 'info') });
  const dbh = createDb(config.DATABASE_URL, { max: 20 });
  const { app } = createApp({
    config,
    db: dbh.db,
    pool: dbh.pool,
    log,
    sessionCookieName: 'runnel.sid',
    clientDir: opts.clientDir,
  });
  const server = http.createServer(app);
  await new Promise<void>((ok, fail) => {
    server.once('error', fail);
    server.listen(config.PORT, config.HOST, () => ok());
  });
  const { port } = server.address() as AddressInfo;
  const url = `http://${config.HOST}:${port}`;
  let closing: Promise<void> | null = null;
  const close = () =>
    (closing ??= (async () => {
      await new Promise<void>((ok) => {
        server.close(() => ok());
        server.closeAllConnections();
      });
      await dbh.close();
    })());
  return { config, log, dbh, server, url, close };
}
