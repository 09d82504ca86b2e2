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
 */
export async function startPgLiveRelay(opts: { databaseUrl: string; pool: pg.Pool; bus: LiveBus; log: Logger }) {
  const instance = randomUUID();
  const stats = { sent: 0, received: 0, tooLarge: 0, errors: 0 };
  let listener: pg.Client | null = null;
  let closed = false;

  const connect = async () => {
    const c = new pg.Client({ connectionString: opts.databaseUrl });
    c.on('notification', (n) => {
      if (n.channel !== LIVE_CHANNEL || !n.payload) return;
      try {
        const { from, e } = JSON.parse(n.payload) as { from: string; e: LiveEvent };
        if (from === instance) return;
        stats.received++;
        opts.bus.receiveRemote(e);
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

  opts.bus.outbound = (e) => {
    const payload = JSON.stringify({ from: instance, e });
    if (payload.length > MAX_PAYLOAD) {
      stats.tooLarge++;
      return;
    }
    stats.sent++;
    opts.pool.query('select pg_notify($1, $2)', [LIVE_CHANNEL, payload]).catch(() => stats.errors++);
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
