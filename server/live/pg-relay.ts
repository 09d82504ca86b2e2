import pg from 'pg';
import { randomUUID } from 'node:crypto';
import type { Logger } from 'pino';
import type { LiveBus } from './bus';
import type { LiveEvent } from './events';

export const LIVE_CHANNEL = 'runnel_live';
/** NOTIFY payloads are limited to 8,000 bytes; larger events (snapshots are never relayed) are skipped and counted. */
const MAX_PAYLOAD = 7900;

/**
 * Shares live events between Runnel instances through PostgreSQL LISTEN/NOTIFY, so a browser
 * connected to any instance sees what every instance ingested. No home-made bus: one LISTEN
 * connection per instance, NOTIFY through the pool.
 *
 * Events published in one turn of the event loop go out together: as many to a notification as
 * fit its size limit, all notifications in one statement, one statement at a time (so they
 * arrive in the order they were published). A busy fleet's thousand readings a second are so a
 * few round trips, not a thousand.
 */
export async function startPgLiveRelay(opts: { databaseUrl: string; pool: pg.Pool; bus: LiveBus; log: Logger }) {
  const instance = randomUUID();
  const stats = { sent: 0, received: 0, tooLarge: 0, errors: 0, notifications: 0 };
  let listener: pg.Client | null = null;
  let closed = false;

  const connect = async () => {
    const c = new pg.Client({ connectionString: opts.databaseUrl });
    c.on('notification', (n) => {
      if (n.channel !== LIVE_CHANNEL || !n.payload) return;
      try {
        const { from, es } = JSON.parse(n.payload) as { from: string; es: LiveEvent[] };
        if (from === instance || !Array.isArray(es)) return;
        for (const e of es) {
          stats.received++;
          opts.bus.receiveRemote(e);
        }
      } catch {
        stats.errors++;
      }
    });
    c.on('error', () => {
      stats.errors++;
      if (!closed) setTimeout(() => void connect().catch(() => {}), 1000).unref();
    });
    await c.connect();
    await c.query(`listen ${LIVE_CHANNEL}`);
    listener = c;
  };
  await connect();

  const head = `{"from":${JSON.stringify(instance)},"es":[`;
  let waiting: string[] = [];
  let sending = false;
  /** The waiting events as notification payloads, each under the size limit. */
  const payloads = (events: string[]) => {
    const out: string[] = [];
    let part: string[] = [];
    let size = head.length + 2;
    for (const e of events) {
      if (part.length && size + e.length + 1 > MAX_PAYLOAD) {
        out.push(`${head}${part.join(',')}]}`);
        part = [];
        size = head.length + 2;
      }
      part.push(e);
      size += e.length + 1;
    }
    if (part.length) out.push(`${head}${part.join(',')}]}`);
    return out;
  };
  const send = async () => {
    sending = true;
    while (waiting.length && !closed) {
      const batch = payloads(waiting);
      waiting = [];
      const params = [LIVE_CHANNEL, ...batch];
      stats.notifications += batch.length;
      await opts.pool.query(`select ${batch.map((_, i) => `pg_notify($1, $${i + 2})`).join(', ')}`, params).catch(() => stats.errors++);
    }
    sending = false;
  };
  opts.bus.outbound = (e) => {
    const one = JSON.stringify(e);
    if (head.length + one.length + 2 > MAX_PAYLOAD) {
      stats.tooLarge++;
      return;
    }
    stats.sent++;
    waiting.push(one);
    if (!sending && waiting.length === 1) setImmediate(() => void (sending ? undefined : send()));
  };

  return {
    instance,
    stats,
    close: async () => {
      closed = true;
      opts.bus.outbound = null;
      await listener?.end().catch(() => {});
    },
  };
}
