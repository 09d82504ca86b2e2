import { and, asc, eq, inArray, sql } from 'drizzle-orm';
import type { Logger } from 'pino';
import type { Clock } from '../clock';
import { batchedLoad, batchedWrite, inIds } from '../db/batch';
import type { Db } from '../db/client';
import { commands, controllers, programZones, programs, readings, runs, sites, valveEvents, zoneRuns, zones, type Site, type ZoneRun } from '../db/schema/index';
import { usableSupply } from '../domain/hydraulics';
import type { Fleet } from '../fleet/fleet';
import type { LiveBus } from '../live/bus';
import type { PreparedStart, ValveDispatcher, ZoneOutcome } from '../services/dispatcher';
import { dayRestriction, windowConflict } from './calendar';
import { activeRainDelay, activeRainDelays, siteHold } from './holds';
import { zoneMinutes } from './minutes';
import { planRun, type PlanZone } from './planner';

export type ExecDeps = {
  db: Db;
  dispatcher: ValveDispatcher;
  fleet: Fleet;
  bus: LiveBus;
  clock: Clock;
  log: Logger;
  /** False once this instance is no longer the one that dispatches. */
  isLeader: () => boolean;
};

/** A zone's look-ups and command record are made this long before its start (ten thousand take a few seconds). */
const PREPARE_AHEAD_MS = 10_000;
/**
 * A prepared zone's command leaves 3–7 s before its start, naming the wait; the board opens on
 * its own timer. Each zone run has its own moment in that span, so ten thousand starts in the
 * same second do not leave in one burst (which would queue them, and delay every arrival).
 */
const sendAhead = (zoneRunId: number) => 3_000 + ((zoneRunId * 2_654_435_761) % 4_000);

type Done = { state: ZoneRun['state']; reason?: string };

/** Turns one run into zone runs and walks them through the dispatcher. */
export class RunExecutor {
  /** Run ids being executed here, so a reconcile never doubles one. */
  readonly executing = new Set<number>();
  /** Per site: resolvers that end a run's remaining zones when it rains. */
  private rainWaiters = new Map<number, Set<() => void>>();

  /** Per site: bumped by every hold event (rain, dry, a delay set or cancelled, on any instance). */
  private holdEpoch = new Map<number, number>();
  /** Per site: zones whose command waits at the board for its start, told of every hold event. */
  private holdWatchers = new Map<number, Set<() => void>>();

  /** Until `t`: true when one of the site's `waiters` is woken first, false when the time comes. */
  private wakeableWait(t: number, siteId: number, waiters: Map<number, Set<() => void>>): Promise<boolean> {
    const ms = t - this.d.clock.now();
    if (ms <= 0) return Promise.resolve(false);
    return new Promise((resolve) => {
      const set = waiters.get(siteId) ?? new Set();
      waiters.set(siteId, set);
      const wake = () => {
        set.delete(wake);
        this.d.clock.clearTimeout(h);
        resolve(true);
      };
      const h = this.d.clock.setTimeout(() => {
        set.delete(wake);
        resolve(false);
      }, ms);
      set.add(wake);
    });
  }

  /** Until `t`: true at the first hold event at the site, false when the time comes. */
  private holdEventBefore(t: number, siteId: number): Promise<boolean> {
    return this.wakeableWait(t, siteId, this.holdWatchers);
  }

  constructor(private d: ExecDeps) {
    d.bus.subscribeAll((e) => {
      if (e.type !== 'hold') return;
      this.holdEpoch.set(e.siteId, (this.holdEpoch.get(e.siteId) ?? 0) + 1);
      for (const w of [...(this.holdWatchers.get(e.siteId) ?? [])]) w();
    });
  }

  // Zones that start together share their queries (see db/batch.ts).
  private siteById = batchedLoad(async (ids: readonly number[]) => new Map((await this.d.db.select().from(sites).where(inIds(sites.id, ids))).map((s) => [s.id, s])));
  private zoneById = batchedLoad(async (ids: readonly number[]) => new Map((await this.d.db.select().from(zones).where(inIds(zones.id, ids))).map((z) => [z.id, z])));
  private delayAt = batchedLoad((ids: readonly number[]) => activeRainDelays(this.d.db, ids, this.d.clock.now()));
  // Only a zone run still planned: a start that failed at once may already have recorded its end.
  private markRunning = batchedWrite((ids: readonly number[]) => this.d.db.update(zoneRuns).set({ state: 'running' }).where(and(inIds(zoneRuns.id, ids), eq(zoneRuns.state, 'planned'))));
  private markStarted = batchedWrite((xs: readonly { id: number; at: number; commandId?: string }[]) =>
    this.d.db.execute(sql`
      update zone_runs z set actual_start = coalesce(v.at, z.actual_start), command_id = coalesce(v.command_id, z.command_id)
      from unnest(${sql.param(xs.map((x) => x.id))}::bigint[], ${sql.param(xs.map((x) => (x.at ? new Date(x.at).toISOString() : null)))}::timestamptz[], ${sql.param(xs.map((x) => x.commandId ?? null))}::uuid[]) as v(id, at, command_id)
      where z.id = v.id`),
  );

  private async sleepUntil(t: number, siteId: number): Promise<'time' | 'rain'> {
    return (await this.wakeableWait(t, siteId, this.rainWaiters)) ? 'rain' : 'time';
  }

  /** Rain at a site: wake every waiting zone so it records the hold now. */
  rained(siteId: number) {
    for (const w of [...(this.rainWaiters.get(siteId) ?? [])]) w();
  }

  private async setRun(runId: number, state: (typeof runs.$inferSelect)['state'], reason?: string | null, ended = false) {
    await this.d.db.update(runs).set({ state, reason: reason ?? null, ...(ended ? { endedAt: new Date(this.d.clock.now()) } : {}) }).where(eq(runs.id, runId));
  }

  private emit(siteId: number, runId: number, state: string, reason?: string | null) {
    this.d.bus.publish({ type: 'run', siteId, runId, state, reason: reason ?? null });
  }

  /** Plan a fresh program run into zone runs, then execute it. */
  async startProgramRun(runId: number): Promise<void> {
    if (this.executing.has(runId)) return;
    this.executing.add(runId);
    try {
      const [run] = await this.d.db.select().from(runs).where(eq(runs.id, runId));
      const [program] = await this.d.db.select().from(programs).where(eq(programs.id, run.programId!));
      const [site] = await this.d.db.select().from(sites).where(eq(sites.id, run.siteId));
      const pzs = await this.d.db.select().from(programZones).where(eq(programZones.programId, program.id)).orderBy(asc(programZones.position));
      const zs = pzs.length ? await this.d.db.select({ zone: zones, ctrl: controllers }).from(zones).innerJoin(controllers, eq(zones.controllerId, controllers.id)).where(inArray(zones.id, pzs.map((p) => p.zoneId))) : [];
      const startMs = run.scheduledFor.getTime();
      const hold = await siteHold(this.d.db, this.d.fleet, site, this.d.clock.now());
      const dayReason = dayRestriction(site.restrictions, startMs, site.timezone);
      const rows: (typeof zoneRuns.$inferInsert)[] = [];
      const planZones: PlanZone[] = [];
      const skipped = new Map<number, Done>();
      for (const pz of pzs) {
        const z = zs.find((x) => x.zone.id === pz.zoneId);
        if (!z || z.ctrl.siteId !== site.id) continue;
        const m = await zoneMinutes(this.d.db, program, pz, z.zone, site, startMs);
        if (m.skip) skipped.set(z.zone.id, { state: 'skipped_not_needed', reason: m.skip });
        planZones.push({ zoneId: z.zone.id, controllerId: z.ctrl.id, flowLpm: z.zone.headCount * z.zone.flowPerHeadLpm, cycles: m.skip ? [0.0001] : m.cycles.length ? m.cycles : [0.0001], soakMinutes: m.soakMinutes });
      }
      const caps = new Map(zs.map((z) => [z.ctrl.id, z.ctrl.maxConcurrentValves]));
      const slots = planRun({ startMs, zones: planZones, parallel: site.allowParallel, usableSupplyLpm: usableSupply(site.supplyFlowLpm, site.supplyMarginPct), maxOpenPerController: caps });
      for (const s of slots) {
        const pz = pzs.find((p) => p.zoneId === s.zoneId)!;
        const minutes = Math.round(((s.endMs - s.startMs) / 60_000) * 100) / 100;
        let state: Done['state'] = 'planned';
        let reason: string | null = null;
        const sk = skipped.get(s.zoneId);
        if (hold) [state, reason] = ['held_rain', hold.reason];
        else if (dayReason) [state, reason] = ['skipped_restriction', dayReason];
        else if (sk) [state, reason] = [sk.state, sk.reason ?? null];
        else {
          const w = windowConflict(site.restrictions, s.startMs, s.endMs, site.timezone);
          if (w) [state, reason] = ['skipped_restriction', w];
        }
        rows.push({
          runId, siteId: site.id, zoneId: s.zoneId, controllerId: s.controllerId, position: pz.position, cycle: s.cycle,
          plannedStart: new Date(s.startMs), plannedEnd: new Date(s.endMs), plannedMinutes: sk ? 0 : minutes,
          estimatedLitres: 0, state, reason,
        });
      }
      if (rows.length) await this.d.db.insert(zoneRuns).values(rows).onConflictDoNothing();
      if (hold) {
        await this.setRun(runId, 'held_rain', hold.reason, true);
        this.emit(site.id, runId, 'held_rain', hold.reason);
        return;
      }
      if (dayReason || rows.every((r) => r.state === 'skipped_restriction')) {
        const reason = dayReason ?? rows[0]?.reason ?? 'Restricted';
        await this.setRun(runId, 'skipped_restriction', reason, true);
        this.emit(site.id, runId, 'skipped_restriction', reason);
        return;
      }
      await this.executeRun(runId, site);
    } finally {
      this.executing.delete(runId);
    }
  }

  /** Execute the planned zone runs of a run (also used to resume after a restart). */
  async executeRun(runId: number, site: Site, alsoWaitFor: Promise<void>[] = []): Promise<void> {
    this.executing.add(runId);
    await this.setRun(runId, 'running');
    this.emit(site.id, runId, 'running');
    const zrs = await this.d.db.select().from(zoneRuns).where(eq(zoneRuns.runId, runId)).orderBy(asc(zoneRuns.plannedStart), asc(zoneRuns.position));
    const done = new Map<number, Promise<void>>();
    const lastOfZone = new Map<number, Promise<void>>();
    let prev: Promise<void> = Promise.resolve();
    const tasks: Promise<void>[] = [];
    for (const zr of zrs) {
      if (zr.state !== 'planned') continue;
      const after = site.allowParallel ? (lastOfZone.get(zr.zoneId) ?? Promise.resolve()) : prev;
      const t = after.then(() => this.runZone(zr, site));
      done.set(zr.id, t);
      lastOfZone.set(zr.zoneId, t);
      prev = t;
      tasks.push(t);
    }
    await Promise.all([...tasks, ...alsoWaitFor]);
    const final = await this.d.db.select({ state: zoneRuns.state, reason: zoneRuns.reason }).from(zoneRuns).where(eq(zoneRuns.runId, runId));
    const states = new Set(final.map((f) => f.state));
    let state: (typeof runs.$inferSelect)['state'] = 'completed';
    let reason: string | null = null;
    if (states.has('planned') && !this.d.isLeader()) return; // another instance carries on
    if (states.has('held_rain')) [state, reason] = ['held_rain', final.find((f) => f.state === 'held_rain')?.reason ?? null];
    else if ([...states].every((s) => s === 'failed')) [state, reason] = ['failed', final[0]?.reason ?? null];
    else if ([...states].some((s) => s !== 'completed' && s !== 'skipped_not_needed')) state = 'partial';
    await this.setRun(runId, state, reason, true);
    this.emit(site.id, runId, state, reason);
    this.executing.delete(runId);
  }

  async finishZone(zr: ZoneRun, d: Done, startMs: number | null, endMs: number | null) {
    const zone = (await this.d.db.select().from(zones).where(eq(zones.id, zr.zoneId)))[0];
    const minutes = startMs && endMs ? Math.max(0, (endMs - startMs) / 60_000) : null;
    const flow = zone ? zone.headCount * zone.flowPerHeadLpm : 0;
    let measured: number | null = null;
    const board = this.d.fleet.getById(zr.controllerId);
    if (board?.hasFlowSensor && startMs && endMs && minutes) {
      const r = await this.d.db
        .select({ avg: sql<number | null>`avg(${readings.flowLpm})` })
        .from(readings)
        .where(and(eq(readings.controllerId, zr.controllerId), sql`${readings.at} >= ${new Date(startMs)} and ${readings.at} < ${new Date(endMs)}`));
      // Share the controller's metered flow by nominal flow when other zones ran at the same time.
      const overl = await this.d.db
        .select({ zoneId: zoneRuns.zoneId })
        .from(zoneRuns)
        .where(and(eq(zoneRuns.controllerId, zr.controllerId), sql`${zoneRuns.id} <> ${zr.id}`, sql`${zoneRuns.actualStart} < ${new Date(endMs)}`, sql`coalesce(${zoneRuns.actualEnd}, now()) > ${new Date(startMs)}`));
      const avg = r[0]?.avg;
      if (avg !== null && avg !== undefined) measured = overl.length ? null : Number(avg) * minutes;
    }
    await this.d.db
      .update(zoneRuns)
      .set({
        state: d.state, reason: d.reason ?? null,
        actualStart: startMs ? new Date(startMs) : null, actualEnd: endMs ? new Date(endMs) : null,
        actualMinutes: minutes !== null ? Math.round(minutes * 100) / 100 : null,
        estimatedLitres: minutes !== null ? Math.round(flow * minutes * 10) / 10 : 0,
        measuredLitres: measured !== null ? Math.round(measured * 10) / 10 : null,
      })
      .where(eq(zoneRuns.id, zr.id));
    this.d.bus.publish({ type: 'zone_run', siteId: zr.siteId, runId: zr.runId, zoneId: zr.zoneId, zoneRunId: zr.id, state: d.state, reason: d.reason ?? null });
  }

  /**
   * Wait for the slot, re-check holds and windows, open through the dispatcher, record the outcome.
   * Ten seconds before the start everything that needs the database is done (site, zone, rain
   * delay, the command record), so at the start itself only memory is checked and the command
   * sent: thousands of zones due in the same second all leave on time. What can change in those
   * seconds is checked again: the rain sensor and holds (a hold at the site wakes the zone, or
   * makes it look again), the clock (a late start checks its window again), soil moisture.
   */
  private async runZone(zr: ZoneRun, site0: Site): Promise<void> {
    const startAt = zr.plannedStart.getTime();
    const seconds = Math.max(1, Math.round(zr.plannedMinutes * 60));
    let woke = await this.sleepUntil(startAt - PREPARE_AHEAD_MS, site0.id);
    if (!this.d.isLeader()) return;
    let epoch = this.holdEpoch.get(site0.id) ?? 0;
    let site = (await this.siteById(site0.id)) ?? site0;
    let delay = await this.delayAt(site.id);
    const zone = await this.zoneById(zr.zoneId);
    const planned = { start: startAt, end: startAt + seconds * 1000 };
    const plannedWindow = windowConflict(site.restrictions, planned.start, planned.end, site.timezone);
    let prepared: PreparedStart | null = null;
    if (woke !== 'rain') {
      // (a zone that cannot be prepared is started the plain way, and fails then with its reason)
      if (!plannedWindow) prepared = await this.d.dispatcher.prepare({ zoneId: zr.zoneId, seconds, origin: 'program' }).catch(() => null);
      // The zone run names its command before the command can leave, so a restart can always tell
      // whether the board was ever asked (see reconcile).
      if (prepared && !(await this.markStarted({ id: zr.id, at: 0, commandId: prepared.commandId }).then(() => true, () => false))) {
        await prepared.cancel('the zone run could not be recorded').catch(() => {});
        prepared = null;
      }
      woke = await this.sleepUntil(startAt - (prepared ? sendAhead(zr.id) : 0), site0.id);
    }
    const giveUp = (why: string) => prepared?.cancel(why).catch((err) => this.d.log.warn({ err }, 'prepared command not cancelled'));
    if (!this.d.isLeader()) return void (await giveUp('this server no longer dispatches'));
    // the checks are made for the moment the zone opens: its start, or now when late
    const now = Math.max(this.d.clock.now(), startAt);
    if ((this.holdEpoch.get(site0.id) ?? 0) !== epoch || (delay && delay.until.getTime() <= now)) {
      // a hold began or ended at the site meanwhile: look again
      epoch = this.holdEpoch.get(site0.id) ?? 0;
      site = (await this.siteById(site0.id)) ?? site;
      delay = await activeRainDelay(this.d.db, site.id, now);
    }
    const hold = await siteHold(this.d.db, this.d.fleet, site, now, async () => delay);
    if (hold || woke === 'rain') {
      await giveUp('held by rain');
      return this.finishZone(zr, { state: 'held_rain', reason: hold?.reason ?? 'Held by rain' }, null, null);
    }
    // The window check walks the run's minutes: the same minutes give the same answer.
    const sameMinutes = Math.floor(now / 60_000) === Math.floor(planned.start / 60_000) && Math.floor((now + seconds * 1000) / 60_000) === Math.floor(planned.end / 60_000);
    const w = sameMinutes ? plannedWindow : windowConflict(site.restrictions, now, now + seconds * 1000, site.timezone);
    if (w) {
      await giveUp(w);
      return this.finishZone(zr, { state: 'skipped_restriction', reason: w }, null, null);
    }
    const board = this.d.fleet.getById(zr.controllerId);
    if (zone?.moistureThresholdPct && board?.latest && board.latest.moisturePct >= zone.moistureThresholdPct) {
      const reason = `Held: soil moisture ${board.latest.moisturePct.toFixed(0)} % is above this zone’s ${zone.moistureThresholdPct} %`;
      await giveUp(reason);
      return this.finishZone(zr, { state: 'held_rain', reason }, null, null);
    }
    let opened: number | null = null;
    /** Set when a hold came between sending the command ahead and the start. */
    let heldFor: Done | null = null;
    const outcome = new Promise<Done & { end: number }>((resolve) => {
      const on = (o: ZoneOutcome) => {
        if (o.kind === 'opened') {
          opened = o.at;
          void this.markStarted({ id: zr.id, at: o.at }).catch((err) => this.d.log.warn({ err }, 'zone run start not recorded'));
          return;
        }
        if (opened === null && heldFor) return resolve({ ...heldFor, end: o.at });
        if (o.kind === 'closed' && o.why === 'rain' && opened === null) return resolve({ state: 'held_rain', reason: 'Held by rain: the rain sensor is wet', end: o.at });
        if (o.kind === 'failed') return resolve({ state: 'failed', reason: o.error, end: o.at });
        const map: Record<string, Done> = {
          completed: { state: 'completed' },
          failsafe: { state: 'completed', reason: 'Closed by the board’s own timer' },
          stopped: { state: 'stopped', reason: 'Stopped by a user' },
          button: { state: 'stopped', reason: 'Closed with the board’s button' },
          board: { state: 'stopped', reason: 'The board reported the valve closed' },
          rain: { state: 'held_rain', reason: 'Rest of the run held by rain' },
        };
        resolve({ ...map[o.why], end: o.at });
      };
      // A prepared start leaves at once: its zone run already names the command. Otherwise the
      // zone run is recorded as running before the command leaves. Either way a restart never
      // starts this zone run twice.
      const req = { zoneId: zr.zoneId, seconds, origin: 'program' as const, onOutcome: on };
      const started = prepared
        ? prepared.fire(on, startAt).then((r) => {
            // the command is out: a failed write here must not fail the zone (reconcile knows its command)
            void this.markRunning(zr.id).catch((err) => this.d.log.warn({ err, zoneRunId: zr.id }, 'zone run not marked running'));
            return r;
          })
        : this.markRunning(zr.id)
            .then(() => this.d.dispatcher.start(req))
            .then((r) => this.markStarted({ id: zr.id, at: 0, commandId: r.commandId }).then(() => r));
      started.catch((e: Error) => resolve({ state: 'failed', reason: e.message, end: this.d.clock.now() }));
    });
    if (prepared && startAt > this.d.clock.now()) {
      // Sent ahead: a hold that begins before the start cancels the waiting open at the board.
      // (the rain sensor itself closes everything at the site: the scheduler's rain handling)
      void (async () => {
        while (await this.holdEventBefore(startAt, site0.id)) {
          const s1 = (await this.siteById(site0.id)) ?? site;
          const h = await siteHold(this.d.db, this.d.fleet, s1, Math.max(this.d.clock.now(), startAt));
          if (!h) continue;
          heldFor = { state: 'held_rain', reason: h.reason };
          return this.d.dispatcher.cancelWaiting(zr.zoneId, site0.id);
        }
      })().catch((err) => this.d.log.warn({ err, zoneRunId: zr.id }, 'hold before the start not applied'));
    }
    const o = await outcome;
    await this.finishZone(zr, o, opened, opened ? o.end : null);
  }

  /**
   * A manual or walk-test start is recorded like a program's: a run of its own kind with one zone
   * run, so history and water use include it. Returns the outcome hook to hand the dispatcher.
   */
  async recordManual(zoneId: number, seconds: number, kind: 'manual' | 'walk'): Promise<(o: ZoneOutcome) => void> {
    const [row] = await this.d.db
      .select({ zone: zones, ctrl: controllers })
      .from(zones)
      .innerJoin(controllers, eq(zones.controllerId, controllers.id))
      .where(eq(zones.id, zoneId));
    const now = this.d.clock.now();
    const [run] = await this.d.db.insert(runs).values({ siteId: row.ctrl.siteId, programId: null, kind, scheduledFor: new Date(now), state: 'running' }).returning();
    const [zr] = await this.d.db
      .insert(zoneRuns)
      .values({
        runId: run.id, siteId: row.ctrl.siteId, zoneId, controllerId: row.ctrl.id, position: 1, cycle: 0,
        plannedStart: new Date(now), plannedEnd: new Date(now + seconds * 1000), plannedMinutes: Math.round((seconds / 60) * 100) / 100,
        estimatedLitres: 0, state: 'running',
      })
      .returning();
    let opened: number | null = null;
    let done = false;
    return (o: ZoneOutcome) => {
      if (done) return;
      if (o.kind === 'opened') {
        opened = o.at;
        void this.d.db.update(zoneRuns).set({ actualStart: new Date(o.at) }).where(eq(zoneRuns.id, zr.id));
        return;
      }
      done = true;
      const d: Done =
        o.kind === 'failed'
          ? { state: 'failed', reason: o.error }
          : o.why === 'completed' || o.why === 'failsafe'
            ? { state: 'completed' }
            : o.why === 'rain'
              ? { state: 'held_rain', reason: 'Closed when the rain sensor tripped' }
              : { state: 'stopped', reason: o.why === 'button' ? 'Closed with the board’s button' : 'Stopped by a user' };
      void this.finishZone(zr, d, opened, opened ? o.at : null).then(() => this.setRun(run.id, d.state === 'completed' ? 'completed' : d.state === 'failed' ? 'failed' : 'partial', d.reason ?? null, true));
    };
  }

  /** Whether the board reported carrying out this command (its events replay after a reconnect). */
  private async carriedOut(zoneId: number, commandId: string, plannedStart: Date): Promise<boolean> {
    const rows = await this.d.db
      .select({ id: valveEvents.id })
      .from(valveEvents)
      .where(and(eq(valveEvents.zoneId, zoneId), sql`${valveEvents.at} >= ${new Date(plannedStart.getTime() - 3_600_000)}`, eq(valveEvents.commandId, commandId)))
      .limit(1);
    return rows.length > 0;
  }

  /** After a restart: end or resume what a run left behind, never doubling a zone. */
  async reconcile(sinceMs: number): Promise<{ resumed: number; ended: number }> {
    const open = await this.d.db.select().from(runs).where(and(inArray(runs.state, ['planned', 'running']), sql`${runs.scheduledFor} > ${new Date(sinceMs)}`));
    let resumed = 0;
    let ended = 0;
    for (const run of open) {
      if (this.executing.has(run.id)) continue;
      const [site] = await this.d.db.select().from(sites).where(eq(sites.id, run.siteId));
      const zrs = await this.d.db.select().from(zoneRuns).where(eq(zoneRuns.runId, run.id));
      if (zrs.length === 0) {
        void this.startProgramRun(run.id);
        resumed++;
        continue;
      }
      const adoptions: Promise<void>[] = [];
      // A zone run that names a command may have been started: it is running, or it was prepared
      // (its command recorded) and perhaps fired before the last server stopped.
      const started = zrs.filter((z) => z.state === 'running' || (z.state === 'planned' && z.commandId));
      const cmdIds = started.map((z) => z.commandId).filter((id): id is string => !!id);
      const cmds = new Map(cmdIds.length ? (await this.d.db.select().from(commands).where(inArray(commands.id, cmdIds))).map((c) => [c.id, c]) : []);
      for (const zr of started) {
        const loc = this.d.fleet.relayOfZone(zr.zoneId);
        const relay = loc ? loc.board.relays[loc.relay - 1] : null;
        const cmd = zr.commandId ? cmds.get(zr.commandId) : undefined;
        const [zone] = await this.d.db.select().from(zones).where(eq(zones.id, zr.zoneId));
        const open = !!(relay?.open && zr.commandId && relay.cmdId === zr.commandId);
        const startedAt = zr.actualStart ?? cmd?.ackedAt ?? cmd?.sentAt ?? (open ? new Date(this.d.clock.now()) : null);
        if (cmd?.state === 'queued' && !open && !(await this.carriedOut(zr.zoneId, cmd.id, zr.plannedStart))) {
          // Never recorded as sent and never seen at the board: it did not leave. Plan it again.
          await this.d.db.update(commands).set({ state: 'cancelled', error: 'the server stopped before this command was sent' }).where(eq(commands.id, cmd.id));
          await this.d.db.update(zoneRuns).set({ state: 'planned', commandId: null }).where(eq(zoneRuns.id, zr.id));
          zr.state = 'planned';
          zr.commandId = null;
          continue;
        }
        if (cmd?.state === 'sent' && !open && !zr.actualStart && zr.plannedStart.getTime() > this.d.clock.now() + 250) {
          // Sent ahead and still waiting at the board: cancel it there (a close cancels a waiting
          // open) and plan the zone again, under a command this server follows.
          await this.d.dispatcher.close(zr.zoneId, site.id, 'stopped');
          await this.d.db.update(commands).set({ state: 'cancelled', error: 'the server restarted before its start; sent again' }).where(eq(commands.id, cmd.id));
          await this.d.db.update(zoneRuns).set({ state: 'planned', commandId: null }).where(eq(zoneRuns.id, zr.id));
          zr.state = 'planned';
          zr.commandId = null;
          continue;
        }
        if (open && startedAt) {
          if (zr.state === 'planned') {
            await this.d.db.update(zoneRuns).set({ state: 'running', actualStart: startedAt }).where(eq(zoneRuns.id, zr.id));
            zr.state = 'running';
          }
          const plannedEnd = startedAt.getTime() + zr.plannedMinutes * 60_000;
          const start = startedAt.getTime();
          adoptions.push(new Promise<void>((resolve) => {
            this.d.dispatcher.adoptRun(site.id, zr.zoneId, zone.headCount * zone.flowPerHeadLpm, plannedEnd, (o) => {
              if (o.kind === 'closed' || o.kind === 'failed') {
                void this.finishZone(zr, o.kind === 'failed' ? { state: 'failed', reason: o.error } : { state: 'completed', reason: 'Resumed after a server restart' }, start, o.at).then(resolve);
              }
            });
          }));
          resumed++;
        } else {
          await this.finishZone(zr, { state: 'stopped', reason: 'The server restarted during this zone; the board closed the valve by itself' }, startedAt?.getTime() ?? null, startedAt ? Math.min(this.d.clock.now(), startedAt.getTime() + zr.plannedMinutes * 60_000) : null);
          zr.state = 'stopped';
          ended++;
        }
      }
      const stale = zrs.filter((z) => z.state === 'planned' && z.plannedStart.getTime() < this.d.clock.now() - 3_600_000);
      for (const zr of stale) await this.finishZone(zr, { state: 'failed', reason: 'Missed while no server was dispatching' }, null, null);
      void this.executeRun(run.id, site, adoptions);
    }
    return { resumed, ended };
  }
}
