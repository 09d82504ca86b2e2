import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { pino, type Logger } from 'pino';
import { startGateway, type Gateway } from '../gateway/index';
import { createApp } from './app';
import { realClock, type Clock } from './clock';
import type { Config } from './config';
import { createDb, type DbHandle } from './db/client';
import { Fleet } from './fleet/fleet';
import { createDeviceSink } from './ingest/device-sink';
import { ReadingWriter } from './ingest/reading-writer';
import { LiveBus } from './live/bus';
import { attachLiveHub, type LiveHub } from './live/hub';
import { ValveDispatcher } from './services/dispatcher';
import type { Services } from './services/registry';
import { Scheduler } from './scheduler/scheduler';
import { startWatch } from './alerts/watch'; // issue 6: rollups, alerts, mail

export type Runtime = {
  config: Config;
  log: Logger;
  dbh: DbHandle;
  server: http.Server;
  url: string;
  gateway: Gateway;
  mqttUrl: string | null;
  services: Services;
  writer: ReadingWriter;
  hub: LiveHub;
  /** Extra parts started alongside (simulator, fake services); closed before the rest. */
  extras: { name: string; close: () => Promise<void> }[];
  close: () => Promise<void>;
};

export type RuntimeOptions = {
  log?: Logger;
  clientDir?: string;
  clock?: Clock;
};

/** Wire every part of Runnel together and listen. index.ts, the e2e tests and the benchmarks use this. */
export async function startRuntime(config: Config, opts: RuntimeOptions = {}): Promise<Runtime> {
  const log = opts.log ?? pino({ level: config.LOG_LEVEL ?? (config.NODE_ENV === 'test' ? 'silent' : 'info') });
  const clock = opts.clock ?? realClock;
  const dbh = createDb(config.DATABASE_URL, { max: 20 });
  const { db, pool } = dbh;

  const extras: Runtime['extras'] = [];
  if (!config.WEATHER_URL && config.NODE_ENV !== 'production') {
    // The local stand-in for a hosted weather service (deterministic, invented data).
    const { startFakeWeatherService } = await import('./weather/fake-service');
    const fake = await startFakeWeatherService({ port: config.WEATHER_PORT, host: config.WEATHER_HOST });
    config.WEATHER_URL = fake.url;
    extras.push({ name: 'fake-weather', close: () => fake.close() });
  }

  const bus = new LiveBus();
  if (config.LIVE_RELAY) {
    const { startPgLiveRelay } = await import('./live/pg-relay');
    const relay = await startPgLiveRelay({ databaseUrl: config.DATABASE_URL, pool, bus, log: log.child({ part: 'relay' }) });
    extras.push({ name: 'live-relay', close: () => relay.close() });
  }
  const fleet = new Fleet(db);
  await fleet.load();
  // What the boards report gets connections of its own, so a valve event is stored (and the
  // board's next message read) without queueing behind the scheduler's or the API's queries.
  const ingestDbh = createDb(config.DATABASE_URL, { max: 4 });
  const writer = new ReadingWriter(ingestDbh.pool, log.child({ part: 'ingest' }), clock, {
    batchRows: config.READING_BATCH_ROWS,
    flushMs: config.READING_FLUSH_MS,
    maxBufferedRows: config.READING_BUFFER_ROWS,
    shared: !!config.MQTT_URL,
    // Each ingest connection brings one message at a time and waits for it to be stored.
    flushAtMessages: config.MQTT_URL ? config.MQTT_INGEST_CONNECTIONS : undefined,
  });
  const sink = createDeviceSink({ db: ingestDbh.db, fleet, writer, bus, clock, log: log.child({ part: 'ingest' }) });
  const gateway = await startGateway({
    embedded: config.MQTT_URL ? undefined : { host: config.MQTT_HOST, port: config.MQTT_PORT },
    external: config.MQTT_URL
      ? { url: config.MQTT_URL, username: config.MQTT_USERNAME, password: config.MQTT_PASSWORD, ingestConnections: config.MQTT_INGEST_CONNECTIONS, clientId: `runnel-${config.INSTANCE_ID ?? `${process.pid}-${Math.random().toString(36).slice(2, 8)}`}` }
      : undefined,
    sink,
    log,
    now: () => clock.now(),
    receiptIntervalMs: config.RECEIPT_INTERVAL_MS,
  });
  const dispatcher = new ValveDispatcher({
    db, fleet, bus, clock, log: log.child({ part: 'dispatcher' }),
    send: (serial, cmd) => gateway.send(serial, cmd),
    ackTimeoutMs: config.ACK_TIMEOUT_MS,
    retries: config.COMMAND_RETRIES,
    failsafeMarginS: config.FAILSAFE_MARGIN_SECONDS,
  });
  sink.setListener(dispatcher);
  const scheduler = new Scheduler({
    db, databaseUrl: config.DATABASE_URL, dispatcher, fleet, bus, clock, log: log.child({ part: 'scheduler' }),
    tickMs: config.SCHEDULER_TICK_MS, reconcileDelayMs: config.RECONCILE_DELAY_MS,
  });
  const services: Services = { fleet, bus, gateway, dispatcher, scheduler, demo: {} };

  const { app, sessionMiddleware } = createApp({
    config, db, pool, log, clock, services,
    sessionCookieName: 'runnel.sid',
    clientDir: opts.clientDir,
  });
  const server = http.createServer(app);
  const hub = attachLiveHub({ server, sessionMiddleware, db, fleet, bus, dispatcher, log: log.child({ part: 'live' }) });
  await new Promise<void>((ok, fail) => {
    server.once('error', fail);
    server.listen(config.PORT, config.HOST, () => ok());
  });
  const { port } = server.address() as AddressInfo;
  const url = `http://${config.HOST}:${port}`;
  const mqttUrl = gateway.port !== null ? `mqtt://${config.MQTT_HOST}:${gateway.port}` : (config.MQTT_URL ?? null);

  // --- issue 6: water-use rollups, the alert engine, mail and the local fake SMTP server ---
  const watch = await startWatch({ config, db, bus, fleet, dispatcher, clock, log, url, services });
  extras.push({ name: 'watch', close: () => watch.close() });
  // --- end issue 6 ---
  if (config.SCHEDULER) scheduler.start();
  const sweep = setInterval(() => void sink.sweepSilent(config.OFFLINE_AFTER_SECONDS * 1000).catch(() => {}), 5000);
  sweep.unref();

  // Requests being answered; a stop lets them finish before the database pools close.
  let inFlight = 0;
  let drained: (() => void) | null = null;
  server.on('request', (_req, res) => {
    inFlight++;
    res.once('close', () => {
      if (--inFlight === 0) drained?.();
    });
  });

  let closing: Promise<void> | null = null;
  const close = () =>
    (closing ??= (async () => {
      clearInterval(sweep);
      // Stop taking requests first, and let the ones already running finish (bounded), so no
      // handler meets a closed pool; idle keep-alive connections close straight away.
      const httpClosed = new Promise<void>((ok) => server.close(() => ok()));
      server.closeIdleConnections();
      if (inFlight > 0) {
        await new Promise<void>((ok) => {
          drained = ok;
          setTimeout(ok, config.SHUTDOWN_GRACE_MS).unref();
        });
      }
      await hub.close();
      server.closeAllConnections();
      await httpClosed;
      for (const e of extras.reverse()) await e.close().catch((err) => log.warn({ err, part: e.name }, 'close failed'));
      await scheduler.stop();
      dispatcher.stop();
      await gateway.close().catch(() => {});
      await writer.close().catch(() => {});
      await ingestDbh.close();
      await dbh.close();
    })());
  return { config, log, dbh, server, url, gateway, mqttUrl, services, writer, hub, extras, close };
}
