import type { Logger } from 'pino';
import type { Clock } from '../clock';
import type { Config } from '../config';
import type { Db } from '../db/client';
import type { Fleet } from '../fleet/fleet';
import type { LiveBus } from '../live/bus';
import type { ValveDispatcher } from '../services/dispatcher';
import type { Services } from '../services/registry';
import { RollupKeeper } from '../history/rollup';
import { ReadingsRollup } from '../history/readings-rollup';
import { startFakeSmtp, type FakeSmtp } from '../mail/fake-smtp';
import { createNullMailer, createSmtpMailer } from '../mail/mailer';
import { MailService, mailSchedule } from '../mail/service';
import { AlertEngine, alertSettings } from './engine';
import { AlertStore } from './store';

/** The parts that watch the fleet and tell people: water-use rollups, the alert engine, mail. */
export type WatchParts = {
  rollups: RollupKeeper;
  readingsRollup: ReadingsRollup;
  store: AlertStore;
  engine: AlertEngine | null;
  mail: MailService;
  /** The local fake SMTP server, when SMTP_URL is not set outside production. */
  fakeSmtp: FakeSmtp | null;
  close: () => Promise<void>;
};

// Keyed by the runtime's Services object, so routes reach these parts through deps.services
// without a module-level singleton.
const registry = new WeakMap<Services, WatchParts>();

export const watchOf = (services: Services | undefined): WatchParts | undefined => (services ? registry.get(services) : undefined);

export type WatchDeps = {
  config: Config;
  db: Db;
  bus: LiveBus;
  fleet: Fleet;
  dispatcher: ValveDispatcher;
  clock: Clock;
  log: Logger;
  /** The server's own URL, for links in mail when PUBLIC_URL is not set. */
  url: string;
  services: Services;
};

export async function startWatch(d: WatchDeps): Promise<WatchParts> {
  const { config, db, bus, clock } = d;
  const log = d.log.child({ part: 'watch' });
  const rollups = new RollupKeeper({ db, bus, clock, log });
  rollups.start();
  const readingsRollup = new ReadingsRollup({ db, clock, log });
  readingsRollup.start();

  let fakeSmtp: FakeSmtp | null = null;
  let smtpUrl = config.SMTP_URL;
  if (!smtpUrl && config.NODE_ENV !== 'production') {
    const opts = { host: config.FAKE_SMTP_HOST, port: config.FAKE_SMTP_PORT, keep: config.FAKE_SMTP_KEEP };
    fakeSmtp = await startFakeSmtp(opts).catch((err: NodeJS.ErrnoException) => {
      if (err.code !== 'EADDRINUSE') throw err;
      log.warn({ port: opts.port }, 'FAKE_SMTP_PORT is taken; the fake SMTP server uses a free port instead');
      return startFakeSmtp({ ...opts, port: 0 });
    });
    smtpUrl = fakeSmtp.url;
    log.info({ smtp: fakeSmtp.url }, 'fake SMTP server keeps outgoing mail in memory');
  }
  const mailer = smtpUrl ? createSmtpMailer({ url: smtpUrl, from: config.MAIL_FROM, local: !!fakeSmtp, log }) : createNullMailer();
  const mail = new MailService(
    {
      db, mailer, log,
      firmName: config.FIRM_NAME,
      baseUrl: (config.PUBLIC_URL ?? d.url).replace(/\/+$/, ''),
      timezone: config.MAIL_TIMEZONE,
      throttleMs: config.ALERT_MAIL_THROTTLE_MINUTES * 60_000,
    },
    clock,
    mailSchedule(config),
  );

  const store = new AlertStore({ db, bus, clock });
  // Without a mail server (production with no SMTP_URL) nothing is queued or logged as sent.
  if (smtpUrl) store.onRaised((a) => void mail.alertRaised(a).catch((err) => log.warn({ err }, 'alert mail failed')));
  else log.warn('SMTP_URL is not set: Runnel sends no alert mail, digests or weekly summaries');
  const engine = config.ALERTS
    ? new AlertEngine({ db, bus, fleet: d.fleet, dispatcher: d.dispatcher, clock, log, store, settings: alertSettings(config) })
    : null;
  await engine?.start();
  if (smtpUrl) mail.start();

  const parts: WatchParts = {
    rollups, readingsRollup, store, engine, mail, fakeSmtp,
    close: async () => {
      await engine?.stop();
      await rollups.stop();
      await readingsRollup.stop();
      await mail.stop();
      await fakeSmtp?.close();
    },
  };
  registry.set(d.services, parts);
  return parts;
}
