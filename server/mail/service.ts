import { DateTime } from 'luxon';
import { sql } from 'drizzle-orm';
import type { Clock } from '../clock';
import type { Config } from '../config';
import type { AlertView } from '../contracts/alerts';
import { flushAlertMail, queueAlertMail, sendDailyDigests } from './alert-mail';
import type { MailCtx } from './context';
import { sendWeeklySummaries } from './weekly';

/** The advisory lock every instance takes to send mail ("MAIL" in ASCII): one sender at a time, cluster-wide. */
export const MAIL_LOCK_KEY = 0x4d41494c;

export type MailSchedule = { tickMs: number; digestHour: number; weeklyDay: number; weeklyHour: number };

export const mailSchedule = (c: Config): MailSchedule => ({
  tickMs: c.MAIL_TICK_MS,
  digestHour: c.MAIL_DIGEST_HOUR,
  weeklyDay: c.MAIL_WEEKLY_DAY,
  weeklyHour: c.MAIL_WEEKLY_HOUR,
});

/**
 * Alert mail, daily digests and weekly summaries on a timer. Every job takes `now`, so tests
 * call them with the time they want; the timer passes the clock's time.
 *
 * Every instance runs one, over the shared mail queue and log. Each job that sends holds a
 * PostgreSQL advisory lock from reading what is due until it has logged what it sent, so two
 * instances never send the same alert, digest or summary: the second waits, then finds it done.
 */
export class MailService {
  private timer: NodeJS.Timeout | null = null;
  private stopped = false;
  private work: Promise<unknown> = Promise.resolve();
  private digestDoneFor: string | null = null;
  private weeklyDoneFor: string | null = null;

  constructor(readonly ctx: MailCtx, private clock: Clock, private schedule: MailSchedule) {}

  /** A real-time timer (as the alert engine's); the jobs take their time from the injected clock. */
  start() {
    let busy = false;
    this.timer = setInterval(() => {
      if (busy || this.stopped) return;
      busy = true;
      void this.serial(() => this.tick(this.clock.now())).finally(() => {
        busy = false;
      });
    }, this.schedule.tickMs);
    this.timer.unref();
  }

  async stop() {
    this.stopped = true;
    if (this.timer) clearInterval(this.timer);
    await this.work.catch(() => {});
    this.ctx.mailer.close();
  }

  private serial<T>(fn: () => Promise<T>): Promise<T> {
    const next = this.work.then(() => this.locked(fn));
    this.work = next.catch((err) => this.ctx.log.warn({ err }, 'mail job failed'));
    return next;
  }

  /** Runs `fn` while this instance holds the mail lock (a transaction's advisory lock, released at its end). */
  private locked<T>(fn: () => Promise<T>): Promise<T> {
    return this.ctx.db.transaction(async (tx) => {
      await tx.execute(sql`select pg_advisory_xact_lock(${MAIL_LOCK_KEY})`);
      return fn();
    });
  }

  /** Resolves when the jobs asked for so far are done. */
  idle(): Promise<unknown> {
    return this.work;
  }

  /** A new alert: queue it for its recipients and send what may go at once. */
  alertRaised(a: AlertView): Promise<number> {
    return this.serial(async () => {
      const now = this.clock.now();
      await queueAlertMail(this.ctx.db, a, now);
      return flushAlertMail(this.ctx, now);
    });
  }

  flush(now = this.clock.now()) {
    return this.serial(() => flushAlertMail(this.ctx, now));
  }

  digests(now = this.clock.now()) {
    return this.serial(() => sendDailyDigests(this.ctx, now));
  }

  weekly(now = this.clock.now()) {
    return this.serial(() => sendWeeklySummaries(this.ctx, now));
  }

  /** What the timer does: throttled alert mail; the digest after its hour; the weekly summary on its day. */
  private async tick(now: number) {
    await flushAlertMail(this.ctx, now);
    const local = DateTime.fromMillis(now, { zone: this.ctx.timezone });
    const day = local.toISODate()!;
    if (local.hour >= this.schedule.digestHour && this.digestDoneFor !== day) {
      await sendDailyDigests(this.ctx, now);
      this.digestDoneFor = day;
    }
    if (local.weekday === this.schedule.weeklyDay && local.hour >= this.schedule.weeklyHour && this.weeklyDoneFor !== day) {
      await sendWeeklySummaries(this.ctx, now);
      this.weeklyDoneFor = day;
    }
  }
}
