import argon2 from 'argon2';
import { createHash } from 'node:crypto';
import { eq, sql } from 'drizzle-orm';
import type { Logger } from 'pino';
import type { DeviceSink } from '../../gateway/types';
import { batched, batchedWrite, inIds } from '../db/batch';
import type { Ack, BoardEvent, BoardStatus, RelayState, Sample, Telemetry } from '../contracts/protocol';
import { isoFromMs } from '../contracts/iso-ms';
import type { Clock } from '../clock';
import type { Db } from '../db/client';
import { controllers, valveEvents } from '../db/schema/index';
import type { BoardLive, Fleet } from '../fleet/fleet';
import type { LiveBus } from '../live/bus';
import { addToHour, copyLine, type HourSums, type ReadingWriter } from './reading-writer';

/** A board's clock within this of the server's is trusted as it is. */
const CLOCK_TOLERANCE_MS = 120_000;

export interface ValveListener {
  relayChanged(board: BoardLive, e: BoardEvent, atMs: number): void;
  relayState(board: BoardLive, s: RelayState): void;
  acknowledged(board: BoardLive, a: Ack): void;
  rainChanged(board: BoardLive, tripped: boolean, atMs: number): void;
  onlineChanged(board: BoardLive, online: boolean): void;
}

export type SinkDeps = {
  db: Db;
  fleet: Fleet;
  writer: ReadingWriter;
  bus: LiveBus;
  clock: Clock;
  log: Logger;
  listener?: ValveListener;
};

const digest = (s: string) => createHash('sha256').update(s).digest('hex');

/** The server's side of the gateway: stores what boards report and tells everyone who may see it. */
export function createDeviceSink(deps: SinkDeps): DeviceSink & { setListener(l: ValveListener): void; sweepSilent(offlineAfterMs: number): Promise<void> } {
  const { db, fleet, writer, bus, log } = deps;
  let listener = deps.listener;
  const verified = new Set<string>();
  /** Per controller and relay: the sequence number of the event its live state shows. */
  const appliedSeq = new Map<string, number>();
  // Events from many boards at once (a schedule opening thousands of zones) share one insert.
  const storeEvent = batched(async (rows: readonly (typeof valveEvents.$inferInsert)[]) => {
    const got = await db.insert(valveEvents).values([...rows]).onConflictDoNothing().returning({ controllerId: valveEvents.controllerId, seq: valveEvents.seq });
    const keys = new Set(got.map((g) => `${g.controllerId}:${g.seq}`));
    return rows.map((r) => keys.has(`${r.controllerId}:${r.seq}`));
  });

  // Boards coming online together (a fleet reconnecting after a broker restart, each status seen
  // by every instance) share one update and one commit; a board named twice keeps its newest.
  const markOnline = batchedWrite(async (rows: readonly { id: number; at: Date; offsetMs: number; firmware: string | null }[]) => {
    const last = new Map(rows.map((r) => [r.id, r]));
    const v = [...last.values()];
    await db.execute(sql`update controllers c set online = true, last_seen_at = v.at, clock_offset_ms = v.off, firmware_version = coalesce(v.fw, c.firmware_version)
      from unnest(${sql.param(v.map((r) => r.id))}::int[], ${sql.param(v.map((r) => r.at.toISOString()))}::timestamptz[],
        ${sql.param(v.map((r) => r.offsetMs))}::int[], ${sql.param(v.map((r) => r.firmware))}::varchar[]) as v(id, at, off, fw)
      where c.id = v.id`);
  });
  const markOffline = batchedWrite(async (ids: readonly number[]) => {
    await db.update(controllers).set({ online: false }).where(inIds(controllers.id, [...new Set(ids)]));
  });

  async function board(serial: string): Promise<BoardLive | null> {
    return fleet.get(serial) ?? (await fleet.refreshSerial(serial));
  }

  /** Server time of a board timestamp: corrected by the offset measured at connect, never in the future. */
  function serverTime(b: BoardLive, boardAt: string, receivedAt: Date): Date {
    const t = Date.parse(boardAt) + b.clockOffsetMs;
    return new Date(Math.min(t, receivedAt.getTime()));
  }

  /** When each board was last marked offline (server time, as receivedAt is). */
  const offlineSince = new Map<number, number>();
  async function setOnline(b: BoardLive, online: boolean, at: Date) {
    const changed = b.online !== online;
    b.online = online;
    b.lastSeenAt = at.getTime();
    if (changed) {
      bus.publish({ type: 'controller', siteId: b.siteId, controllerId: b.controllerId, online, lastSeenAt: at.toISOString() });
      listener?.onlineChanged(b, online);
    }
  }

  return {
    setListener(l) {
      listener = l;
    },

    async authenticate(serial, secret) {
      const [c] = await db
        .select({ id: controllers.id, hash: controllers.secretHash, retiredAt: controllers.retiredAt, lastSeq: controllers.lastSeq })
        .from(controllers)
        .where(eq(controllers.serial, serial));
      if (!c || !c.hash || c.retiredAt) return null;
      // A (hash, secret) pair once verified stays valid; a rotated secret has a new hash.
      const key = `${c.hash}|${digest(secret)}`;
      let ok = verified.has(key);
      if (!ok) {
        ok = await argon2.verify(c.hash, secret).catch(() => false);
        if (ok) {
          if (verified.size > 50_000) verified.clear();
          verified.add(key);
        }
      }
      return ok ? { lastSeq: c.lastSeq } : null;
    },

    async online(serial, status: BoardStatus, receivedAt) {
      const b = await board(serial);
      if (!b) return;
      let offset = 0;
      if (status.at) {
        const diff = receivedAt.getTime() - Date.parse(status.at);
        if (Math.abs(diff) > CLOCK_TOLERANCE_MS) offset = diff;
      }
      b.clockOffsetMs = offset;
      if (offset) log.warn({ serial, offsetMs: offset }, 'board clock is off; correcting its times');
      await markOnline({ id: b.controllerId, at: receivedAt, offsetMs: offset, firmware: status.firmware ?? null });
      await setOnline(b, true, receivedAt);
    },

    async offline(serial, reason, at) {
      const b = fleet.get(serial);
      if (!b || !b.online) return;
      log.info({ serial, reason }, 'board offline');
      await markOffline(b.controllerId);
      b.online = false;
      offlineSince.set(b.controllerId, at.getTime());
      bus.publish({ type: 'controller', siteId: b.siteId, controllerId: b.controllerId, online: false, lastSeenAt: b.lastSeenAt ? new Date(b.lastSeenAt).toISOString() : null });
      listener?.onlineChanged(b, false);
      void at;
    },

    async relayChanged(serial, e: BoardEvent, receivedAt) {
      const b = await board(serial);
      if (!b) return;
      const at = serverTime(b, e.at, receivedAt);
      const zoneId = b.zoneByRelay.get(e.relay) ?? null;
      // One row per board and sequence number: a resend (or a second instance's copy) stores nothing.
      // The board's stored sequence number moves with its readings only (see ReadingWriter).
      // Recorded first, then shown: whoever sees a valve change can find it in the history.
      const stored = await storeEvent({
        controllerId: b.controllerId, zoneId, relay: e.relay, open: e.open, source: e.source,
        commandId: e.cmdId && /^[0-9a-f-]{36}$/.test(e.cmdId) ? e.cmdId : null,
        seq: e.seq, boardAt: new Date(e.at), at, receivedAt,
      });
      if (!stored) return;
      b.lastSeenAt = receivedAt.getTime();
      // With shared ingest an older event can arrive after a newer one: stored for the history,
      // but a relay's live state follows only its newest event.
      const relayKey = `${b.controllerId}:${e.relay}`;
      const shown = appliedSeq.get(relayKey);
      if (shown !== undefined && e.seq < shown && shown - e.seq < 1_000_000) return; // (a far lower one is a board that restarted)
      appliedSeq.set(relayKey, e.seq);
      const r = b.relays[e.relay - 1];
      if (r) {
        r.open = e.open;
        r.since = e.open ? at.getTime() : null;
        if (!e.open) r.plannedEnd = null;
        r.cmdId = e.cmdId;
      }
      listener?.relayChanged(b, e, at.getTime());
      bus.publish({
        type: 'valve', siteId: b.siteId, controllerId: b.controllerId, zoneId, relay: e.relay, open: e.open,
        at: at.toISOString(), source: e.source,
        since: r?.since ? new Date(r.since).toISOString() : null,
        plannedEnd: r?.plannedEnd ? new Date(r.plannedEnd).toISOString() : null,
      });
    },

    async relayState(serial, s: RelayState, receivedAt) {
      const b = await board(serial);
      if (!b) return;
      s.relays.forEach((x, i) => {
        const r = b.relays[i];
        if (!r) return;
        r.open = x.open;
        r.since = x.open && x.since ? serverTime(b, x.since, receivedAt).getTime() : null;
        r.cmdId = x.cmdId;
        if (!x.open) r.plannedEnd = null;
        else if (x.closesAt && !r.plannedEnd) r.plannedEnd = Date.parse(x.closesAt) + b.clockOffsetMs;
      });
      b.lastSeenAt = receivedAt.getTime();
      listener?.relayState(b, s);
    },

    async acknowledged(serial, a: Ack, receivedAt) {
      const b = await board(serial);
      if (!b) return;
      b.lastSeenAt = receivedAt.getTime();
      listener?.acknowledged(b, a);
    },

    async samples(serial, seq, t: Telemetry, receivedAt) {
      const b = await board(serial);
      if (!b) return;
      // Straight to COPY text: a busy fleet sends tens of thousands of samples a second.
      const recvMs = receivedAt.getTime();
      const recvIso = receivedAt.toISOString();
      // A trusted clock a little ahead of ours (the newest sample is taken as the message leaves)
      // keeps its own time, so a message sent again gets the same stored time and is recognised
      // as stored; a time further ahead than any trusted clock can be is this server's receipt time.
      const serverMs = (boardMs: number) => {
        const corrected = boardMs + b.clockOffsetMs;
        return corrected <= recvMs + CLOCK_TOLERANCE_MS ? corrected : recvMs;
      };
      let text = '';
      let lastAtMs = 0;
      const hours: HourSums[] = [];
      let last: Omit<Sample, 'at'>;
      let n: number;
      if (t.columns) {
        const c = t.columns;
        const t0 = Date.parse(c.t0);
        const flow = c.flowLpm;
        n = c.dtMs.length;
        const one = { rain: false, moistureRaw: 0, moisturePct: 0, supplyV: 0, flowLpm: null as number | null, rssi: 0 };
        for (let i = 0; i < n; i++) {
          const boardMs = t0 + c.dtMs[i];
          const atMs = serverMs(boardMs);
          const boardIso = isoFromMs(boardMs);
          one.rain = c.rain[i];
          one.moistureRaw = c.moistureRaw[i];
          one.moisturePct = c.moisturePct[i];
          one.supplyV = c.supplyV[i];
          one.flowLpm = flow ? flow[i] : null;
          one.rssi = c.rssi[i];
          text += copyLine(b.controllerId, atMs === boardMs ? boardIso : isoFromMs(atMs), boardIso, recvIso, seq, one);
          addToHour(hours, atMs, one);
          lastAtMs = atMs;
        }
        last = { ...one };
      } else {
        const samples = t.samples!;
        for (const x of samples) {
          const boardMs = Date.parse(x.at);
          const atMs = serverMs(boardMs);
          // A trusted board time is stored as the board wrote it (the protocol checked it).
          text += copyLine(b.controllerId, atMs === boardMs ? x.at : new Date(atMs).toISOString(), x.at, recvIso, seq, x);
          addToHour(hours, atMs, x);
          lastAtMs = atMs;
        }
        last = samples[samples.length - 1];
        n = samples.length;
      }
      t = undefined as unknown as Telemetry; // (let the message go while the commit is awaited; only its newest sample is needed)
      await writer.writeText(b.controllerId, seq, text, n, hours);
      b.lastSeenAt = recvMs;
      // A batch that commits after the board went offline does not bring it back: only a message
      // received after that does (the board reconnected).
      if (!b.online && receivedAt.getTime() > (offlineSince.get(b.controllerId) ?? -Infinity)) await setOnline(b, true, receivedAt);
      // Shared ingest can hand an older message over after a newer one: it is stored, but the
      // live picture (latest reading, rain) only moves forward in time.
      if (b.latest && lastAtMs < b.latest.atMs) return;
      // The live sparkline keeps one point per message (its newest sample): a board sampling
      // fast would otherwise push its minutes-long picture out within seconds.
      fleet.pushRecent(b, { at: lastAtMs, moisturePct: last.moisturePct, flowLpm: last.flowLpm, supplyV: last.supplyV });
      b.latest = { ...last, atMs: lastAtMs };
      const lastIso = new Date(lastAtMs).toISOString();
      if (last.rain !== b.rain) {
        b.rain = last.rain;
        await db.update(controllers).set({ rainTripped: last.rain }).where(eq(controllers.id, b.controllerId));
        bus.publish({ type: 'rain', siteId: b.siteId, controllerId: b.controllerId, tripped: last.rain, at: lastIso });
        listener?.rainChanged(b, last.rain, lastAtMs);
      }
      bus.publish({
        type: 'reading', siteId: b.siteId, controllerId: b.controllerId, at: lastIso,
        rain: last.rain, moisturePct: last.moisturePct, supplyV: last.supplyV, flowLpm: last.flowLpm, rssi: last.rssi,
      });
    },

    gap(serial, missing) {
      const b = fleet.get(serial);
      log.warn({ serial, missing }, 'board sequence gap');
      if (b) void db.update(controllers).set({ seqGaps: sql`${controllers.seqGaps} + ${missing}` }).where(eq(controllers.id, b.controllerId)).catch(() => {});
    },

    async sweepSilent(offlineAfterMs) {
      const now = deps.clock.now();
      for (const b of fleet.all()) {
        if (b.online && b.lastSeenAt !== null && now - b.lastSeenAt > offlineAfterMs) {
          await this.offline(b.serial, 'silence', new Date(now));
        }
      }
    },
  };
}
