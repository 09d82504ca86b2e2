import { randomUUID } from 'node:crypto';
import { eq, sql } from 'drizzle-orm';
import type { Logger } from 'pino';
import type { Ack, BoardEvent, Command, RelayState } from '../contracts/protocol';
import { MAX_START_IN_MS } from '../contracts/protocol';
import type { Clock } from '../clock';
import type { Db } from '../db/client';
import { batchedLoad, batchedWrite, inIds } from '../db/batch';
import { commands, controllers, sites, zones } from '../db/schema/index';
import { usableSupply } from '../domain/hydraulics';
import { conflict, notFound } from '../errors';
import type { BoardLive, Fleet } from '../fleet/fleet';
import type { ValveListener } from '../ingest/device-sink';
import type { LiveBus } from '../live/bus';
import { recordAudit } from './audit';
import type { Actor } from './actor';

export type Origin = 'manual' | 'program' | 'walk' | 'button' | 'adopted';

export type ZoneOutcome =
  | { kind: 'opened'; at: number }
  | { kind: 'closed'; at: number; why: 'completed' | 'stopped' | 'failsafe' | 'button' | 'rain' | 'board' }
  | { kind: 'failed'; at: number; error: string };

export type StartRequest = {
  zoneId: number;
  seconds: number;
  origin: Origin;
  actor?: Actor | null;
  /** Called as the zone opens, closes or fails (the scheduler records zone runs from this). */
  onOutcome?: (o: ZoneOutcome) => void;
  /** Server time: open no sooner than this. The command leaves now and the board waits (a program's start sent ahead). */
  startAt?: number;
};

/** A start whose look-ups and command record are done (see ValveDispatcher.prepare). */
export type PreparedStart = { commandId: string; fire(onOutcome?: (o: ZoneOutcome) => void, startAt?: number): Promise<StartResult>; cancel(why: string): Promise<void> };

/** The board answered a command with ok:false. */
export class BoardRefused extends Error {
  constructor(readonly ack: Ack) {
    super(`the board refused: ${ack.error ?? 'no reason given'}`);
  }
}

export type StartResult = { commandId: string; state: 'sent' | 'queued'; reason?: string; zoneId: number };

type Active = {
  zoneId: number;
  controllerId: number;
  relay: number;
  flowLpm: number;
  commandId: string;
  seconds: number;
  state: 'opening' | 'open' | 'closing';
  plannedEnd: number | null;
  closeTimer: unknown;
  origin: Origin;
  actor: Actor | null;
  onOutcome?: (o: ZoneOutcome) => void;
  closeWhy?: 'completed' | 'stopped' | 'rain';
  done?: boolean;
  /** The board's sequence number on the acknowledgement that opened it: a relay state older than that predates the open. */
  openedSeq?: number;
  /** Open no sooner than this (server time); see StartRequest.startAt. */
  startAt?: number;
};

type ZoneInfo = { zone: typeof zones.$inferSelect; controller: typeof controllers.$inferSelect; site: typeof sites.$inferSelect };

type CommandRow = Pick<typeof commands.$inferInsert, 'id' | 'controllerId' | 'zoneId' | 'op' | 'relay' | 'maxOnSeconds' | 'origin' | 'requestedBy'> & { state: 'queued' };

type Queued = Omit<Active, 'state' | 'plannedEnd' | 'closeTimer'> & { queuedAt: number };
/**
 * The zones open or opening at a site, by zone, with their total flow and the count per
 * controller kept up to date, so admitting a zone does not walk every zone of a large site.
 */
class ActiveZones extends Map<number, Active> {
  flowLpm = 0;
  private perBoard = new Map<number, number>();

  onBoard(controllerId: number): number {
    return this.perBoard?.get(controllerId) ?? 0;
  }

  override set(zoneId: number, a: Active): this {
    const old = super.get(zoneId);
    if (old) this.forget(old);
    super.set(zoneId, a);
    this.flowLpm += a.flowLpm;
    this.perBoard.set(a.controllerId, this.onBoard(a.controllerId) + 1);
    return this;
  }

  override delete(zoneId: number): boolean {
    const old = super.get(zoneId);
    if (!old) return false;
    this.forget(old);
    super.delete(zoneId);
    if (this.size === 0) this.flowLpm = 0; // no drift from adding and taking away
    return true;
  }

  /** A zone's flow changed while it was open (a run taken over after a restart). */
  reflow(a: Active, flowLpm: number) {
    if (super.get(a.zoneId) === a) this.flowLpm += flowLpm - a.flowLpm;
    a.flowLpm = flowLpm;
  }

  private forget(a: Active) {
    this.flowLpm -= a.flowLpm;
    const n = this.onBoard(a.controllerId) - 1;
    if (n > 0) this.perBoard.set(a.controllerId, n);
    else this.perBoard.delete(a.controllerId);
  }
}

type SiteState = { active: ActiveZones; queue: Queued[] };
type MasterState = { open: boolean; plannedEnd: number };

export type DispatcherDeps = {
  db: Db;
  fleet: Fleet;
  bus: LiveBus;
  send: (serial: string, cmd: Command) => Promise<void>;
  clock: Clock;
  log: Logger;
  ackTimeoutMs: number;
  retries: number;
  failsafeMarginS: number;
};

/**
 * Decides when each valve opens. Relays on one controller are energised at least the
 * controller's stagger apart; a controller never has more zones open than its cap, and a site
 * never draws more than its usable supply (one zone alone may, when it is flagged over supply).
 * What does not fit waits in the site's queue. Nothing counts as done until the board acknowledges.
 */
export class ValveDispatcher implements ValveListener {
  private sites = new Map<number, SiteState>();
  private nextSlot = new Map<number, number>();
  private masters = new Map<number, MasterState>();
  private acks = new Map<string, (a: Ack) => void>();
  private stopped = false;

  constructor(private d: DispatcherDeps) {}

  // Thousands of zones starting in the same second share their queries (see db/batch.ts).
  private zoneInfo = batchedLoad(async (ids: readonly number[]): Promise<Map<number, ZoneInfo>> => {
    const rows = await this.d.db
      .select({ zone: zones, controller: controllers, site: sites })
      .from(zones)
      .innerJoin(controllers, eq(zones.controllerId, controllers.id))
      .innerJoin(sites, eq(controllers.siteId, sites.id))
      .where(inIds(zones.id, ids));
    return new Map(rows.map((r) => [r.zone.id, r]));
  });

  // One array per column: building a 2,000-row VALUES list costs more than the insert itself.
  private recordCommand = batchedWrite((rows: readonly CommandRow[]) =>
    this.d.db.execute(sql`
      insert into commands (id, controller_id, zone_id, op, relay, max_on_seconds, origin, requested_by, state)
      select v.id, v.controller_id, v.zone_id, v.op, v.relay, v.max_on_seconds, v.origin, v.requested_by, v.state::command_state
      from unnest(${pgArray(rows.map((r) => r.id))}::uuid[], ${pgArray(rows.map((r) => r.controllerId))}::int[], ${pgArray(rows.map((r) => r.zoneId ?? null))}::int[],
        ${pgArray(rows.map((r) => r.op))}::text[], ${pgArray(rows.map((r) => r.relay ?? null))}::smallint[], ${pgArray(rows.map((r) => r.maxOnSeconds ?? null))}::int[],
        ${pgArray(rows.map((r) => r.origin))}::text[], ${pgArray(rows.map((r) => r.requestedBy ?? null))}::int[], ${pgArray(rows.map((r) => r.state))}::text[])
        as v(id, controller_id, zone_id, op, relay, max_on_seconds, origin, requested_by, state)`),
  );

  private markSent = batchedWrite((xs: readonly { id: string; attempts: number; at: Date }[]) =>
    this.d.db.execute(sql`
      update commands c set state = 'sent', attempts = v.attempts, sent_at = v.at
      from unnest(${pgArray(xs.map((x) => x.id))}::uuid[], ${pgArray(xs.map((x) => x.attempts))}::int[], ${pgArray(xs.map((x) => x.at.toISOString()))}::timestamptz[]) as v(id, attempts, at)
      where c.id = v.id`),
  );

  private markAcked = batchedWrite((xs: readonly { id: string; at: Date }[]) =>
    this.d.db.execute(sql`
      update commands c set state = 'acked', acked_at = v.at
      from unnest(${pgArray(xs.map((x) => x.id))}::uuid[], ${pgArray(xs.map((x) => x.at.toISOString()))}::timestamptz[]) as v(id, at)
      where c.id = v.id`),
  );

  /** Commands waiting for an acknowledgement right now. */
  get inFlight(): number {
    return this.acks.size;
  }

  private site(siteId: number): SiteState {
    let s = this.sites.get(siteId);
    if (!s) this.sites.set(siteId, (s = { active: new ActiveZones(), queue: [] }));
    return s;
  }

  /** Open (or extend) a zone for `seconds`. Throws 404 / 409 for an unknown zone or an offline controller. */
  async start(req: StartRequest): Promise<StartResult> {
    const row = await this.zoneInfo(req.zoneId);
    if (!row) throw notFound('Zone');
    return this.begin(req, row, null);
  }

  /**
   * A start known ahead (a program's zone): the look-ups and the command record are done now, so
   * when the moment comes `fire` only checks memory and sends. `cancel` records why it never fired.
   */
  async prepare(req: StartRequest): Promise<PreparedStart> {
    const row = await this.zoneInfo(req.zoneId);
    if (!row) throw notFound('Zone');
    const commandId = randomUUID();
    await this.recordCommand({
      id: commandId, controllerId: row.controller.id, zoneId: req.zoneId, op: 'open', relay: row.zone.relay,
      maxOnSeconds: req.seconds + this.d.failsafeMarginS, origin: req.origin, requestedBy: req.actor?.userId || null, state: 'queued',
    });
    let used = false;
    return {
      commandId,
      fire: (onOutcome, startAt) => {
        if (used) return Promise.reject(new Error('this start was already used'));
        used = true;
        return this.begin({ ...req, onOutcome: onOutcome ?? req.onOutcome, startAt: startAt ?? req.startAt }, row, commandId);
      },
      cancel: async (why) => {
        if (used) return;
        used = true;
        await this.dropCommand(commandId, 'cancelled', why);
      },
    };
  }

  private async dropCommand(id: string, state: 'cancelled' | 'failed', why: string) {
    await this.d.db.update(commands).set({ state, error: why.slice(0, 300) }).where(eq(commands.id, id));
  }

  /** The start itself; `recorded` is the id of a command already recorded (a prepared start). */
  private async begin(req: StartRequest, row: ZoneInfo, recorded: string | null): Promise<StartResult> {
    const board = this.d.fleet.getById(row.controller.id) ?? (await this.d.fleet.refresh(row.controller.id));
    if (!board || !board.online) {
      const why = `${row.controller.name} is offline; the valve cannot be opened until it reconnects`;
      if (recorded) await this.dropCommand(recorded, 'failed', why).catch(() => {});
      throw conflict('controller_offline', why);
    }
    const s = this.site(row.site.id);
    const flowLpm = row.zone.headCount * row.zone.flowPerHeadLpm;
    const existing = s.active.get(req.zoneId);
    if (existing && existing.state !== 'closing') {
      // Already running: extend from now (under the command already open).
      if (recorded) await this.dropCommand(recorded, 'cancelled', 'the zone was already open; its run was extended').catch(() => {});
      existing.seconds = req.seconds;
      await this.openRelay(board, existing, true);
      return { commandId: existing.commandId, state: 'sent', zoneId: req.zoneId };
    }
    const commandId = recorded ?? randomUUID();
    const item: Queued = {
      zoneId: req.zoneId, controllerId: board.controllerId, relay: row.zone.relay, flowLpm, commandId,
      seconds: req.seconds, origin: req.origin, actor: req.actor ?? null, onOutcome: req.onOutcome, queuedAt: this.d.clock.now(),
      ...(req.startAt ? { startAt: req.startAt } : {}),
    };
    if (!recorded) {
      await this.recordCommand({
        id: commandId, controllerId: board.controllerId, zoneId: req.zoneId, op: 'open', relay: row.zone.relay,
        maxOnSeconds: req.seconds + this.d.failsafeMarginS, origin: req.origin, requestedBy: req.actor?.userId || null, state: 'queued',
      });
    }
    const usable = usableSupply(row.site.supplyFlowLpm, row.site.supplyMarginPct);
    const blocker = s.queue.length ? 'other zones are waiting ahead of it' : this.blocker(s, board, item, usable);
    if (blocker) {
      s.queue.push(item);
      this.emitCommand(board, item, 'queued', `Waiting: ${blocker}`);
      return { commandId, state: 'queued', reason: blocker, zoneId: req.zoneId };
    }
    this.launch(s, board, item);
    return { commandId, state: 'sent', zoneId: req.zoneId };
  }

  /** Why a zone cannot open now, or null when it can. */
  private blocker(s: SiteState, board: BoardLive, item: Queued, usable: number): string | null {
    const onBoard = s.active.onBoard(board.controllerId);
    const inUse = s.active.flowLpm;
    if (onBoard >= board.maxConcurrentValves) {
      return `${board.name} already has ${onBoard} of ${board.maxConcurrentValves} valves open`;
    }
    if (s.active.size > 0 && inUse + item.flowLpm > usable + 1e-9) {
      return `the supply is in use (${round1(inUse)} of ${round1(usable)} L/min; this zone needs ${round1(item.flowLpm)})`;
    }
    return null;
  }

  private launch(s: SiteState, board: BoardLive, item: Queued) {
    const a: Active = { ...item, state: 'opening', plannedEnd: null, closeTimer: null };
    s.active.set(item.zoneId, a);
    void this.openRelay(board, a, false).catch((err) => this.d.log.error({ err }, 'open failed'));
  }

  /** Reserve the next moment (not before `notBefore`) a relay on this controller may be energised. */
  private reserveSlot(board: BoardLive, notBefore = 0): number {
    const now = this.d.clock.now();
    const t = Math.max(now, notBefore, this.nextSlot.get(board.controllerId) ?? 0);
    this.nextSlot.set(board.controllerId, t + board.staggerMs);
    return t;
  }

  private async waitUntil(t: number) {
    const ms = t - this.d.clock.now();
    if (ms > 0) await new Promise<void>((r) => this.d.clock.setTimeout(r, ms));
  }

  private async openRelay(board: BoardLive, a: Active, extend: boolean) {
    const s = this.site(board.siteId);
    try {
      const notBefore = extend ? 0 : (a.startAt ?? 0);
      if (board.masterValveRelay) await this.ensureMaster(board, a.seconds, notBefore);
      const cmd = (slot: number): Command => ({
        v: 1, id: a.commandId, op: 'open', relay: a.relay, maxOnSeconds: a.seconds + this.d.failsafeMarginS, minGapMs: board.staggerMs,
        ...(notBefore && slot > this.d.clock.now() ? { startInMs: Math.min(MAX_START_IN_MS, Math.round(slot - this.d.clock.now())) } : {}),
        at: new Date(this.d.clock.now()).toISOString(),
      });
      const relayOpen = board.relays[a.relay - 1]?.open;
      const asked = this.d.clock.now();
      const ack = await this.sendWithAck(board, cmd, !relayOpen && !extend, notBefore);
      a.openedSeq = ack.seq;
      if (this.stopped) return;
      // The board acknowledges once the relay is on, stamped with its clock (corrected as its
      // other times are): under load that is earlier than the acknowledgement's arrival.
      const now = Math.min(this.d.clock.now(), Math.max(asked, Date.parse(ack.at) + board.clockOffsetMs || 0));
      if (a.state === 'closing' || a.done) {
        // Stopped while the open was on its way: the board did open it, and the close already
        // sent decides from here (it finishes the run, or the board's failsafe closes the valve).
        await this.markAcked({ id: a.commandId, at: new Date(now) });
        this.emitCommand(board, a, 'acked');
        if (!extend && !a.done) a.onOutcome?.({ kind: 'opened', at: now });
        return;
      }
      a.state = 'open';
      a.plannedEnd = now + a.seconds * 1000;
      const r = board.relays[a.relay - 1];
      if (r) r.plannedEnd = a.plannedEnd;
      if (a.closeTimer) this.d.clock.clearTimeout(a.closeTimer);
      a.closeTimer = this.d.clock.setTimeout(() => void this.close(a.zoneId, board.siteId, 'completed'), Math.max(0, a.plannedEnd - this.d.clock.now()));
      await this.markAcked({ id: a.commandId, at: new Date(now) });
      this.emitCommand(board, a, 'acked');
      if (!extend) a.onOutcome?.({ kind: 'opened', at: now });
      if (a.actor) await recordAudit(this.d.db, a.actor, { action: 'valve.open', entityType: 'zone', entityId: a.zoneId, siteId: board.siteId, outcome: 'acked', after: { seconds: a.seconds, commandId: a.commandId } });
    } catch (err) {
      const msg = (err as Error).message;
      if (a.state === 'closing' && err instanceof BoardRefused) {
        // Closed while the board was still waiting to open it: cancelled, never energised.
        const why = `${a.closeWhy === 'rain' ? 'held by rain' : 'stopped'} before its start; the board never opened it`;
        await this.dropCommand(a.commandId, 'cancelled', why).catch(() => {});
        this.emitCommand(board, a, 'cancelled', why);
        return this.finish(board, a, { kind: 'closed', at: this.d.clock.now(), why: a.closeWhy === 'completed' || !a.closeWhy ? 'stopped' : a.closeWhy });
      }
      a.done = true;
      if (s.active.get(a.zoneId) === a) s.active.delete(a.zoneId);
      await this.d.db.update(commands).set({ state: 'failed', error: msg.slice(0, 300) }).where(eq(commands.id, a.commandId)).catch(() => {});
      this.emitCommand(board, a, 'failed', msg);
      a.onOutcome?.({ kind: 'failed', at: this.d.clock.now(), error: msg });
      if (a.actor) await recordAudit(this.d.db, a.actor, { action: 'valve.open', entityType: 'zone', entityId: a.zoneId, siteId: board.siteId, outcome: 'failed', after: { error: msg } }).catch(() => {});
      await this.afterRelease(board);
    }
  }

  private async ensureMaster(board: BoardLive, seconds: number, notBefore = 0) {
    const relay = board.masterValveRelay!;
    const want = Math.max(this.d.clock.now(), notBefore) + (seconds + this.d.failsafeMarginS) * 1000;
    const m = this.masters.get(board.controllerId);
    if (m?.open && m.plannedEnd >= want) return;
    const fresh = !m?.open && !board.relays[relay - 1]?.open;
    const id = randomUUID();
    const maxOn = Math.ceil((want - this.d.clock.now()) / 1000) + this.d.failsafeMarginS;
    const cmd = (slot: number): Command => ({
      v: 1, id, op: 'open', relay, maxOnSeconds: maxOn, minGapMs: board.staggerMs,
      ...(notBefore && slot > this.d.clock.now() ? { startInMs: Math.min(MAX_START_IN_MS, Math.round(slot - this.d.clock.now())) } : {}),
      at: new Date(this.d.clock.now()).toISOString(),
    });
    await this.sendWithAck(board, cmd, fresh, notBefore);
    this.masters.set(board.controllerId, { open: true, plannedEnd: want });
  }

  /**
   * Send a command and wait for its acknowledgement, retrying on silence. An energising command
   * waits for its slot on the controller: slots are the controller's stagger apart, and the open
   * command carries the stagger as `minGapMs`, so the board itself never energises two relays
   * closer than that, whatever the network does to the timing. So the next relay's command need
   * not wait for this one's acknowledgement, and a board's zones start the stagger apart. It may
   * even leave a little before its slot (a quarter of the acknowledgement wait, at most a
   * second): the board holds it until the gap has passed, so zones that start together leave
   * together instead of each waiting for a timer of its own.
   */
  private async sendWithAck(board: BoardLive, make: (slot: number) => Command, energise: boolean, notBefore = 0): Promise<Ack> {
    const attempts = 1 + this.d.retries;
    let lastErr = 'no acknowledgement';
    for (let i = 0; i < attempts; i++) {
      if (this.stopped) throw new Error('server stopping');
      let slot = 0;
      if (energise) {
        slot = this.reserveSlot(board, notBefore);
        // a start sent ahead leaves now, naming its slot; others leave just before theirs
        if (!notBefore) await this.waitUntil(slot - Math.min(1000, this.d.ackTimeoutMs / 4));
      }
      const cmd = make(slot);
      // the board answers once the relay is on: the wait for the acknowledgement starts at the slot
      const wait = this.d.ackTimeoutMs + Math.max(0, slot - this.d.clock.now());
      const ack = new Promise<Ack | null>((resolve) => {
        const timer = this.d.clock.setTimeout(() => {
          this.acks.delete(cmd.id);
          resolve(null);
        }, wait);
        this.acks.set(cmd.id, (a) => {
          this.d.clock.clearTimeout(timer);
          this.acks.delete(cmd.id);
          resolve(a);
        });
      });
      await this.d.send(board.serial, cmd).catch((e) => {
        lastErr = `could not send: ${(e as Error).message}`;
      });
      await this.markSent({ id: cmd.id, attempts: i + 1, at: new Date(this.d.clock.now()) }).catch(() => {});
      const a = await ack;
      if (a?.ok) return a;
      if (a && !a.ok) throw new BoardRefused(a);
      lastErr = `no acknowledgement from ${board.name} after ${i + 1} tries`;
    }
    throw new Error(lastErr);
  }

  /** Close a zone (or drop it from the queue). */
  async close(zoneId: number, siteId: number, why: 'completed' | 'stopped' | 'rain', actor?: Actor | null): Promise<boolean> {
    const s = this.site(siteId);
    const qi = s.queue.findIndex((q) => q.zoneId === zoneId);
    if (qi >= 0) {
      const [q] = s.queue.splice(qi, 1);
      await this.d.db.update(commands).set({ state: 'cancelled' }).where(eq(commands.id, q.commandId));
      const board = this.d.fleet.getById(q.controllerId);
      if (board) this.emitCommand(board, q, 'cancelled', 'Removed from the queue');
      q.onOutcome?.({ kind: 'closed', at: this.d.clock.now(), why: why === 'completed' ? 'stopped' : why });
      return true;
    }
    const a = s.active.get(zoneId);
    const loc = this.d.fleet.relayOfZone(zoneId);
    const board = a ? this.d.fleet.getById(a.controllerId) : loc?.board;
    const relay = a?.relay ?? loc?.relay;
    if (!board || !relay) return false;
    if (a) {
      if (a.closeTimer) this.d.clock.clearTimeout(a.closeTimer);
      a.state = 'closing';
      a.closeWhy = why;
    }
    const id = randomUUID();
    try {
      await this.recordCommand({ id, controllerId: board.controllerId, zoneId, op: 'close', relay, origin: a?.origin ?? 'manual', requestedBy: actor?.userId || null, state: 'queued' });
      await this.sendWithAck(board, () => ({ v: 1, id, op: 'close', relay, at: new Date(this.d.clock.now()).toISOString() }), false);
      await this.markAcked({ id, at: new Date(this.d.clock.now()) });
      if (actor) await recordAudit(this.d.db, actor, { action: 'valve.close', entityType: 'zone', entityId: zoneId, siteId, outcome: 'acked' });
    } catch (err) {
      // The board's failsafe will still close it at the commanded maximum on-time.
      await this.d.db.update(commands).set({ state: 'failed', error: (err as Error).message.slice(0, 300) }).where(eq(commands.id, id)).catch(() => {});
      if (actor) await recordAudit(this.d.db, actor, { action: 'valve.close', entityType: 'zone', entityId: zoneId, siteId, outcome: 'failed' }).catch(() => {});
      this.d.log.warn({ zoneId, err: (err as Error).message }, 'close not acknowledged; board failsafe will close it');
      return false;
    }
    if (a) this.finish(board, a, { kind: 'closed', at: this.d.clock.now(), why });
    return true;
  }

  /** A start sent ahead that the board is still waiting to carry out: cancel it (a hold came first). */
  async cancelWaiting(zoneId: number, siteId: number): Promise<void> {
    const a = this.site(siteId).active.get(zoneId);
    if (a && a.state === 'opening') await this.close(zoneId, siteId, 'rain');
  }

  /** Close every valve of a site and empty its queue. */
  async stopSite(siteId: number, why: 'stopped' | 'rain', actor?: Actor | null): Promise<void> {
    const s = this.site(siteId);
    for (const q of [...s.queue]) await this.close(q.zoneId, siteId, why, actor);
    const openZones = new Set<number>([...s.active.keys()]);
    for (const b of this.d.fleet.ofSite(siteId)) {
      b.relays.forEach((r, i) => {
        const z = b.zoneByRelay.get(i + 1);
        if (r.open && z) openZones.add(z);
      });
    }
    await Promise.all([...openZones].map((z) => this.close(z, siteId, why, actor)));
  }

  /** A zone's run is over: drop it, report once, then release what it held. */
  private finish(board: BoardLive, a: Active, o: ZoneOutcome) {
    if (a.done) return;
    a.done = true;
    if (a.closeTimer) this.d.clock.clearTimeout(a.closeTimer);
    const s = this.site(board.siteId);
    if (s.active.get(a.zoneId) === a) s.active.delete(a.zoneId);
    a.onOutcome?.(o);
    void this.afterRelease(board);
  }

  /** After a zone stops: close the master valve when nothing else runs on the controller, then admit queued zones. */
  private async afterRelease(board: BoardLive) {
    const s = this.site(board.siteId);
    const stillOnBoard = s.active.onBoard(board.controllerId) > 0;
    const m = this.masters.get(board.controllerId);
    if (board.masterValveRelay && !stillOnBoard && (m?.open || board.relays[board.masterValveRelay - 1]?.open)) {
      this.masters.delete(board.controllerId);
      const id = randomUUID();
      await this.sendWithAck(board, () => ({ v: 1, id, op: 'close', relay: board.masterValveRelay!, at: new Date(this.d.clock.now()).toISOString() }), false).catch(
        (err) => this.d.log.warn({ err: (err as Error).message }, 'master valve close not acknowledged'),
      );
    }
    await this.pump(board.siteId);
  }

  /** Admit queued zones that now fit, in order. */
  private async pump(siteId: number) {
    const s = this.site(siteId);
    if (!s.queue.length) return;
    const [site] = await this.d.db.select().from(sites).where(eq(sites.id, siteId));
    if (!site) return;
    const usable = usableSupply(site.supplyFlowLpm, site.supplyMarginPct);
    for (const q of [...s.queue]) {
      const board = this.d.fleet.getById(q.controllerId);
      if (!board) continue;
      if (!board.online) continue;
      if (this.blocker(s, board, q, usable)) continue;
      s.queue.splice(s.queue.indexOf(q), 1);
      this.emitCommand(board, q, 'sent');
      this.launch(s, board, q);
    }
  }

  private emitCommand(board: BoardLive, a: Pick<Active, 'commandId' | 'zoneId' | 'actor'>, state: 'queued' | 'sent' | 'acked' | 'failed' | 'cancelled', message?: string) {
    this.d.bus.publish({
      type: 'command', siteId: board.siteId, commandId: a.commandId, zoneId: a.zoneId, controllerId: board.controllerId,
      op: 'open', state, message, userId: a.actor?.userId ?? null,
    });
  }

  /** What is open or waiting at a site, for snapshots and the API. */
  siteActivity(siteId: number) {
    const s = this.site(siteId);
    return {
      active: [...s.active.values()].map((a) => ({ zoneId: a.zoneId, controllerId: a.controllerId, relay: a.relay, state: a.state, plannedEnd: a.plannedEnd, origin: a.origin, flowLpm: a.flowLpm })),
      queue: s.queue.map((q, i) => ({ zoneId: q.zoneId, controllerId: q.controllerId, position: i + 1, seconds: q.seconds, origin: q.origin, commandId: q.commandId })),
    };
  }

  // ---- what the boards report (ValveListener) ----

  acknowledged(_board: BoardLive, a: Ack) {
    this.acks.get(a.id)?.(a);
  }

  relayChanged(board: BoardLive, e: BoardEvent, atMs: number) {
    const s = this.site(board.siteId);
    const zoneId = board.zoneByRelay.get(e.relay);
    if (e.relay === board.masterValveRelay) {
      if (!e.open) this.masters.delete(board.controllerId);
      return;
    }
    if (!zoneId) return;
    const a = s.active.get(zoneId);
    if (!e.open && a && a.state !== 'opening') {
      const why = a.state === 'closing' ? a.closeWhy ?? 'stopped' : e.source === 'failsafe' ? 'failsafe' : e.source === 'button' ? 'button' : 'board';
      this.finish(board, a, { kind: 'closed', at: atMs, why });
    } else if (e.open && !a && e.source === 'button') {
      // Someone opened it at the board: it counts against the caps until it closes.
      s.active.set(zoneId, this.adopted(board, e.relay, zoneId, 'button', atMs + 600_000));
    }
  }

  relayState(board: BoardLive, st: RelayState) {
    const s = this.site(board.siteId);
    st.relays.forEach((r, i) => {
      const relay = i + 1;
      const zoneId = board.zoneByRelay.get(relay);
      if (!zoneId) return;
      const a = s.active.get(zoneId);
      if (r.open && !a) {
        s.active.set(zoneId, this.adopted(board, relay, zoneId, 'adopted', r.closesAt ? Date.parse(r.closesAt) + board.clockOffsetMs : null));
      } else if (!r.open && a && a.state === 'open' && !staleState(st.seq, a.openedSeq)) {
        this.finish(board, a, { kind: 'closed', at: this.d.clock.now(), why: 'board' });
      }
    });
  }

  private adopted(board: BoardLive, relay: number, zoneId: number, origin: Origin, plannedEnd: number | null): Active {
    return {
      zoneId, controllerId: board.controllerId, relay, flowLpm: 0, commandId: '', seconds: 0, state: 'open',
      plannedEnd, closeTimer: null, origin, actor: null,
    };
  }

  /** Take charge again of a zone a board still has open after a restart: close it at its planned end. */
  adoptRun(siteId: number, zoneId: number, flowLpm: number, plannedEndMs: number, onOutcome: (o: ZoneOutcome) => void): boolean {
    const loc = this.d.fleet.relayOfZone(zoneId);
    if (!loc) return false;
    const s = this.site(siteId);
    let a = s.active.get(zoneId);
    if (!a) {
      a = this.adopted(loc.board, loc.relay, zoneId, 'program', plannedEndMs);
      s.active.set(zoneId, a);
    }
    a.origin = 'program';
    s.active.reflow(a, flowLpm);
    a.plannedEnd = plannedEndMs;
    a.onOutcome = onOutcome;
    if (a.closeTimer) this.d.clock.clearTimeout(a.closeTimer);
    a.closeTimer = this.d.clock.setTimeout(() => void this.close(zoneId, siteId, 'completed'), Math.max(0, plannedEndMs - this.d.clock.now()));
    return true;
  }

  /** Listeners for rain changes (the scheduler's rain hold). */
  private rainListeners: ((board: BoardLive, tripped: boolean, atMs: number) => void)[] = [];
  onRain(fn: (board: BoardLive, tripped: boolean, atMs: number) => void) {
    this.rainListeners.push(fn);
  }

  rainChanged(board: BoardLive, tripped: boolean, atMs: number) {
    for (const fn of this.rainListeners) fn(board, tripped, atMs);
  }

  /** Close every open valve of a site one after another, each controller's stagger apart (rain). */
  async closeSiteStaggered(siteId: number, why: 'rain' | 'stopped', actor?: Actor | null) {
    const s = this.site(siteId);
    for (const q of [...s.queue]) await this.close(q.zoneId, siteId, why, actor);
    const zonesOpen = new Set<number>([...s.active.keys()]);
    for (const b of this.d.fleet.ofSite(siteId)) b.relays.forEach((r, i) => { const z = b.zoneByRelay.get(i + 1); if (r.open && z) zonesOpen.add(z); });
    let first = true;
    for (const z of zonesOpen) {
      const loc = this.d.fleet.relayOfZone(z);
      if (!first && loc) await new Promise<void>((r) => this.d.clock.setTimeout(r, Math.min(loc.board.staggerMs, 500)));
      first = false;
      void this.close(z, siteId, why, actor);
    }
  }

  onlineChanged(board: BoardLive, online: boolean) {
    if (online) void this.pump(board.siteId);
  }

  stop() {
    this.stopped = true;
    for (const s of this.sites.values()) for (const a of s.active.values()) if (a.closeTimer) this.d.clock.clearTimeout(a.closeTimer);
  }
}

const round1 = (v: number) => Math.round(v * 10) / 10;

/** A JavaScript array as one PostgreSQL array parameter. */
const pgArray = <T>(xs: T[]) => sql.param(xs);

/**
 * A state the board sent before it opened this relay can arrive after the acknowledgement (which
 * skips the queue of valve facts): it says nothing about the valve now. A far lower number is a
 * board that restarted (it counts from its power-on clock), and its relays are really off.
 */
function staleState(stateSeq: number, openedSeq: number | undefined): boolean {
  return openedSeq !== undefined && stateSeq < openedSeq && openedSeq - stateSeq < 1_000_000;
}
