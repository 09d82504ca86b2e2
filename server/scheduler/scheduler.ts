import pg from 'pg';
import { eq } from 'drizzle-orm';
import type { Logger } from 'pino';
import type { Clock } from '../clock';
import type { Db } from '../db/client';
import { programs, runs, sites } from '../db/schema/index';
import type { Fleet } from '../fleet/fleet';
import type { LiveBus } from '../live/bus';
import type { ValveDispatcher } from '../services/dispatcher';
import { occurrences } from './calendar';
import { RunExecutor } from './executor';

/**
 * Runs are planned this far ahead of their start (zone runs, minutes, holds at planning), so a
 * thousand programs due at once are planned well before the minute, not during it.
 */
const DEFAULT_LOOKAHEAD_MS = 60_000;

/** How far past the window the next start of a program is looked for (then looked for again). */
const LOOK_FOR_NEXT_MS = 24 * 3_600_000;

/** The advisory lock key that makes one instance the dispatcher ("RUNNEL" in ASCII). */
export const SCHEDULER_LOCK_KEY = 0x52554e4e454c;

export type SchedulerDeps = {
  db: Db;
  databaseUrl: string;
  dispatcher: ValveDispatcher;
  fleet: Fleet;
  bus: LiveBus;
  clock: Clock;
  log: Logger;
  tickMs?: number;
  /** How far back a newly elected dispatcher looks for starts it may have missed. */
  catchUpMs?: number;
  /** Wait after taking the lock before reconciling, so boards can report their relays. */
  reconcileDelayMs?: number;
  /** Runs are created this far ahead of their start, so a start is dispatched on time, not at the next tick. */
  lookaheadMs?: number;
};

/**
 * Exactly one instance dispatches: the one holding a PostgreSQL advisory lock on its own
 * connection. It expands program starts into runs (a unique key per program and start makes a
 * slot run once, whatever happens), executes them, holds them for rain, and on taking over
 * reconciles runs that were in progress.
 */
export class Scheduler {
  readonly executor: RunExecutor;
  private lockClient: pg.Client | null = null;
  private leader = false;
  private lastTick: number | null = null;
  private timer: unknown = null;
  private stopped = false;
  private ticking = false;
  readonly stats = { ticks: 0, runsCreated: 0, leaderSince: null as number | null };
  /** Per program: the first start after the window last looked at (or when to look again), and the calendar it came from. */
  private nextStart = new Map<number, { key: string; at: number }>();

  constructor(private d: SchedulerDeps) {
    this.executor = new RunExecutor({ db: d.db, dispatcher: d.dispatcher, fleet: d.fleet, bus: d.bus, clock: d.clock, log: d.log, isLeader: () => this.leader && !this.stopped });
    d.dispatcher.onRain((board, tripped, atMs) => void this.onRain(board.siteId, tripped, atMs));
  }

  get isLeader() {
    return this.leader;
  }

  start() {
    const loop = async () => {
      if (this.stopped) return;
      await this.tick().catch((err) => this.d.log.error({ err }, 'scheduler tick failed'));
      if (!this.stopped) this.timer = this.d.clock.setTimeout(loop, this.d.tickMs ?? 1000);
    };
    void loop();
  }

  async stop() {
    this.stopped = true;
    if (this.timer) this.d.clock.clearTimeout(this.timer);
    this.leader = false;
    if (this.lockClient) await this.lockClient.end().catch(() => {});
    this.lockClient = null;
  }

  /** Try to become (or stay) the dispatching instance. */
  private async ensureLeadership(): Promise<boolean> {
    try {
      if (!this.lockClient) {
        const c = new pg.Client({ connectionString: this.d.databaseUrl });
        c.on('error', () => this.loseLeadership('lock connection error'));
        c.on('end', () => this.loseLeadership('lock connection ended'));
        await c.connect();
        if (this.stopped) {
          // stopped while connecting: never take the lock on the way out
          await c.end().catch(() => {});
          return false;
        }
        this.lockClient = c;
      }
      if (this.leader) {
        await this.lockClient.query('select 1');
        return true;
      }
      const r = await this.lockClient.query('select pg_try_advisory_lock($1) as ok', [SCHEDULER_LOCK_KEY]);
      if (this.stopped) {
        // stop() ran while the lock was being asked for: let it go with the connection
        this.loseLeadership('stopping');
        return false;
      }
      if (r.rows[0].ok) {
        this.leader = true;
        this.nextStart.clear(); // the catch-up window looks back past what is known
        this.stats.leaderSince = this.d.clock.now();
        this.d.log.info('this instance now dispatches schedules');
        this.lastTick = this.d.clock.now() - (this.d.catchUpMs ?? 120_000);
        const since = this.d.clock.now() - 12 * 3_600_000;
        this.d.clock.setTimeout(() => void this.executor.reconcile(since).catch((err) => this.d.log.error({ err }, 'reconcile failed')), this.d.reconcileDelayMs ?? 5000);
      }
      return this.leader;
    } catch (err) {
      this.loseLeadership((err as Error).message);
      return false;
    }
  }

  private loseLeadership(why: string) {
    if (this.leader) this.d.log.warn({ why }, 'lost the scheduler lock; no longer dispatching');
    this.leader = false;
    const c = this.lockClient;
    this.lockClient = null;
    c?.end().catch(() => {});
  }

  /** One pass: take leadership if free, then create and start the runs due since the last pass. */
  async tick(): Promise<void> {
    if (this.ticking) return;
    this.ticking = true;
    try {
      this.stats.ticks++;
      if (!(await this.ensureLeadership())) return;
      const now = this.d.clock.now();
      const ahead = now + (this.d.lookaheadMs ?? Math.max(2 * (this.d.tickMs ?? 1000), DEFAULT_LOOKAHEAD_MS));
      // Overlapping windows: a program saved just before its start is still found; the unique
      // (program, start) key keeps a start that is found twice from running twice.
      const from = this.lastTick ?? now - 1000;
      this.lastTick = now;
      const list = await this.d.db
        .select({ program: programs, site: sites })
        .from(programs)
        .innerJoin(sites, eq(programs.siteId, sites.id))
        .where(eq(programs.enabled, true));
      for (const { program, site } of list) {
        // Most programs have no start in this window: the next one is known, so cron is not asked
        // again until the window reaches it (or the program's calendar or the site's timezone changes).
        const key = JSON.stringify([program.startTimes, program.dayRule, program.activeFrom, program.activeTo, site.timezone]);
        const known = this.nextStart.get(program.id);
        if (known && known.key === key && known.at > ahead) continue;
        const next = occurrences(program, site.timezone, ahead, ahead + LOOK_FOR_NEXT_MS)[0];
        this.nextStart.set(program.id, { key, at: next ?? ahead + LOOK_FOR_NEXT_MS });
        for (const t of occurrences(program, site.timezone, from, ahead)) {
          const [created] = await this.d.db
            .insert(runs)
            .values({ siteId: site.id, programId: program.id, scheduledFor: new Date(t), state: 'planned' })
            .onConflictDoNothing()
            .returning({ id: runs.id });
          if (!created) continue; // this slot already ran (another instance, or before a restart)
          this.stats.runsCreated++;
          void this.executor.startProgramRun(created.id).catch((err) => this.d.log.error({ err, runId: created.id }, 'run failed'));
        }
      }
    } finally {
      this.ticking = false;
    }
  }

  /** Rain trips: close every valve at the site (staggered) and hold the rest; dry: start the hold clock. */
  private async onRain(siteId: number, tripped: boolean, atMs: number) {
    if (tripped) {
      this.d.bus.publish({ type: 'hold', siteId, kind: 'sensor', reason: 'Held by rain: the rain sensor is wet', at: new Date(atMs).toISOString() });
      this.executor.rained(siteId);
      if (this.leader) await this.d.dispatcher.closeSiteStaggered(siteId, 'rain');
    } else if (!this.d.fleet.ofSite(siteId).some((b) => b.rain)) {
      await this.d.db.update(sites).set({ rainClearedAt: new Date(atMs) }).where(eq(sites.id, siteId));
      this.d.bus.publish({ type: 'hold', siteId, kind: 'after_rain', reason: 'Rain sensor dry; the site’s rain delay runs from now', at: new Date(atMs).toISOString() });
    }
  }
}

