import type http from 'node:http';
import type { Duplex } from 'node:stream';
import type { RequestHandler } from 'express';
import { WebSocketServer, type WebSocket } from 'ws';
import { z } from 'zod';
import type { Logger } from 'pino';
import type { Db } from '../db/client';
import type { Fleet } from '../fleet/fleet';
import { canSeeSite, loadActor, type Actor } from '../services/actor';
import type { ValveDispatcher } from '../services/dispatcher';
import type { LiveBus } from './bus';
import type { LiveEvent } from './events';
import { buildSnapshot } from './snapshot';

const clientMessage = z.discriminatedUnion('type', [
  z.strictObject({ type: z.literal('ping') }),
  z.strictObject({ type: z.literal('resync') }),
]);

export type HubOptions = {
  server: http.Server;
  sessionMiddleware: RequestHandler;
  db: Db;
  fleet: Fleet;
  bus: LiveBus;
  dispatcher: ValveDispatcher | null;
  log: Logger;
  /** Past this many bytes waiting to be sent, a client's events are dropped and it is resynced later. */
  maxBufferedBytes?: number;
  recheckMs?: number;
  allowedOrigins?: (host: string | undefined) => string[];
  snapshotExtra?: (actor: Actor, siteIds: number[]) => Promise<Record<string, unknown>>;
};

type Conn = { ws: WebSocket; actor: Actor; lagging: boolean; dropped: number };

export type LiveHub = { clients: () => number; stats: { dropped: number; resyncs: number; rejectedMessages: number }; close: () => Promise<void> };

/**
 * /ws — authenticated by the session cookie. On connect: a snapshot of what the person may see,
 * then change events for those sites only. A client that cannot keep up is skipped and resynced.
 */
export function attachLiveHub(o: HubOptions): LiveHub {
  const wss = new WebSocketServer({ noServer: true, maxPayload: 4096 });
  const conns = new Set<Conn>();
  const maxBuffered = o.maxBufferedBytes ?? 1_000_000;
  const stats = { dropped: 0, resyncs: 0, rejectedMessages: 0 };

  const onUpgrade = (req: http.IncomingMessage, socket: Duplex, head: Buffer) => {
    const url = new URL(req.url ?? '/', 'http://x');
    if (url.pathname !== '/ws') return; // not ours (vite HMR in dev, for example)
    const origin = req.headers.origin;
    const host = req.headers.host;
    const allowed = o.allowedOrigins?.(host) ?? [`http://${host}`, `https://${host}`];
    if (origin && !allowed.includes(origin)) {
      socket.end('HTTP/1.1 403 Forbidden\r\n\r\n');
      return;
    }
    const res = { getHeader: () => undefined, setHeader: () => undefined, on: () => undefined, end: () => undefined } as unknown as http.ServerResponse;
    o.sessionMiddleware(req as never, res as never, async () => {
      const userId = (req as unknown as { session?: { userId?: number } }).session?.userId;
      const actor = userId ? await loadActor(o.db, userId).catch(() => null) : null;
      if (!actor) {
        socket.end('HTTP/1.1 401 Unauthorized\r\n\r\n');
        return;
      }
      wss.handleUpgrade(req, socket, head, (ws) => onConnection(ws, actor, userId!));
    });
  };
  o.server.on('upgrade', onUpgrade);

  const send = (c: Conn, msg: unknown) => {
    if (c.ws.readyState === c.ws.OPEN) c.ws.send(JSON.stringify(msg));
  };
  const snapshot = async (c: Conn) => {
    const snap = await buildSnapshot(o.db, o.fleet, o.dispatcher, c.actor, o.snapshotExtra ? (ids) => o.snapshotExtra!(c.actor, ids) : undefined);
    send(c, snap);
  };

  function onConnection(ws: WebSocket, actor: Actor, userId: number) {
    const c: Conn = { ws, actor, lagging: false, dropped: 0 };
    conns.add(c);
    void snapshot(c).catch((err) => o.log.warn({ err }, 'snapshot failed'));
    const recheck = setInterval(async () => {
      const a = await loadActor(o.db, userId).catch(() => undefined);
      if (a === null) ws.close(4401, 'signed out');
      else if (a) c.actor = a;
    }, o.recheckMs ?? 15_000);
    recheck.unref();
    ws.on('message', (data) => {
      let parsed: z.infer<typeof clientMessage> | null = null;
      try {
        const r = clientMessage.safeParse(JSON.parse(String(data)));
        if (r.success) parsed = r.data;
      } catch {
        /* not JSON */
      }
      if (!parsed) {
        stats.rejectedMessages++;
        send(c, { type: 'error', code: 'bad_message', message: 'Messages must be {"type":"ping"} or {"type":"resync"}' });
        return;
      }
      if (parsed.type === 'ping') send(c, { type: 'pong', at: new Date().toISOString() });
      else void snapshot(c);
    });
    ws.on('close', () => {
      clearInterval(recheck);
      conns.delete(c);
    });
    ws.on('error', () => ws.terminate());
  }

  /** A person disabled or signed out everywhere: close their sockets now; changed: reload what they may see. */
  const onPersonEvent = (e: LiveEvent): boolean => {
    const userId = (e as { userId?: unknown }).userId;
    if (typeof userId !== 'number') return false;
    if (e.type === 'user-disabled' || e.type === 'user-signed-out') {
      for (const c of conns) if (c.actor.userId === userId) c.ws.close(4401, 'signed out');
      return true;
    }
    if (e.type === 'user-changed') {
      for (const c of conns) {
        if (c.actor.userId !== userId) continue;
        void loadActor(o.db, userId)
          .then((a) => {
            if (!a) return c.ws.close(4401, 'signed out');
            c.actor = a;
            return snapshot(c);
          })
          .catch(() => {});
      }
      return true;
    }
    return false;
  };

  const unsubscribe = o.bus.subscribeAll((e: LiveEvent) => {
    if (e.type.startsWith('user-') && onPersonEvent(e)) return;
    const text = JSON.stringify(e);
    for (const c of conns) {
      if (!canSeeSite(c.actor, e.siteId)) continue;
      if (e.type === 'command' && (e as { userId?: number | null }).userId && c.actor.role === 'owner' && (e as { userId?: number }).userId !== c.actor.userId) continue;
      if (c.ws.bufferedAmount > maxBuffered) {
        c.lagging = true;
        c.dropped++;
        stats.dropped++;
        continue;
      }
      if (c.lagging) {
        c.lagging = false;
        stats.resyncs++;
        void snapshot(c);
        continue;
      }
      c.ws.send(text);
    }
  });

  return {
    clients: () => conns.size,
    stats,
    close: async () => {
      unsubscribe();
      o.server.off('upgrade', onUpgrade);
      for (const c of conns) c.ws.terminate();
      await new Promise<void>((r) => wss.close(() => r()));
    },
  };
}
