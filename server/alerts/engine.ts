import { sql } from 'drizzle-orm';
import { DateTime } from 'luxon';
import type { Logger } from 'pino';
import type { Clock } from '../clock';
import type { Config } from '../config';
import type { Db } from '../db/client';
import type { BoardLive, Fleet } from '../fleet/fleet';
import type { LiveBus } from '../live/bus';
import type { CommandLiveEvent, ControllerLiveEvent, LiveEvent, RainLiveEvent, ReadingLiveEvent } from '../live/events';
import type { ValveDispatcher } from '../services/dispatcher';
import type { AlertKind } from '../contracts/alerts';
import { episodeKey, type AlertStore, type RaiseInput } from './store';
import { Sustain, flowVerdict, voltageLow } from './sustain';
import { ms } from '../history/sql';

export type AlertSettings = {
  tickMs: number;
  offlineMs: number;
  stuckMs: number;
  highRatio: number;
  lowRatio: number;
  leakLpm: number;
  flowMs: number;
  settleMs: number;
  lowVoltageV: number;
  voltageMs: number;
};

export const alertSettings = (c: Config): AlertSettings => ({
  tickMs: c.ALERT_TICK_MS,
  offlineMs: c.ALERT_OFFLINE_SECONDS * 1000,
  stuckMs: c.ALERT_STUCK_SECONDS * 1000,
  highRatio: c.ALERT_FLOW_HIGH_RATIO,
  lowRatio: c.ALERT_FLOW_LOW_RATIO,
  leakLpm: c.ALERT_LEAK_LPM,
  flowMs: c.ALERT_FLOW_SECONDS * 1000,
  settleMs: c.ALERT_FLOW_SETTLE_SECONDS * 1000,
  lowVoltageV: c.ALERT_LOW_VOLTAGE_V,
  voltageMs: c.ALERT_VOLTAGE_SECONDS * 1000,
});

type ZoneInfo = { zoneId: number; name: string; flowLpm: number };
type Wiring = { siteName: string; rainDelayHours: number; zones: Map<number, ZoneInfo> };

const r1 = (v: number) => Math.round(v * 10) / 10;
const when = (t: number) => DateTime.fromMillis(t).toUTC().toFormat("d LLL HH:mm 'UTC'");

export type EngineDeps = {
  db: Db;
  bus: LiveBus;
  fleet: Fleet;
  dispatcher: ValveDispatcher;
  clock: Clock;
  log: Logger;
  store: AlertStore;
  settings: AlertSettings;
};

/**
 * Watches what the boards report (through the LiveBus and the fleet's live state) and raises
 * an alert once per episode of a condition, resolving it when the condition ends.
 */
export class AlertEngine {
  private s: AlertSettings;
  private sustain = new Sustain();
  private offlineSince = new Map<number, number>();
  private relayChangedAt = new Map<number, number>();
  private rainDryAt = new Map<number, number>();
  private wiring = new Map<number, Wiring>();
  private wiringAt = 0;
  private startedAt = 0;
  private timer: NodeJS.Timeout | null = null;
  private ticking = false;
  private unsubscribe: (() => void) | null = null;
  private stopped = false;
  private work: Promise<unknown> = Promise.resolve();

  constructor(private d: EngineDeps) {
    this.s = d.settings;
  }

  async start(): Promise<void> {
    this.startedAt = this.d.clock.now();
    for (const key of (await this.d.store.liveKeys()).keys()) this.sustain.live.add(key);
    await this.loadWiring();
    this.unsubscribe = this.d.bus.subscribe((e) => this.serial(() => this.onEvent(e)));
    // Polling is a real-time matter (like the silence sweep): the timer is a real one, while every
    // duration is measured on the injected clock. A virtual clock in tests is not crowded with ticks.
    this.timer = setInterval(() => {
      if (!this.ticking) void this.checkNow();
    }, this.s.tickMs);
    this.timer.unref();
  }

  async stop(): Promise<void> {
    this.stopped = true;
    this.unsubscribe?.();
    if (this.timer) clearInterval(this.timer);
    await this.work.catch(() => {});
  }

  /** Run the time-based checks now (offline, stuck valves, rain holds); the timer calls this. */
  checkNow(): Promise<void> {
    this.ticking = true;
    return this.serial(() => this.tick()).finally(() => {
      this.ticking = false;
    });
  }

  /** Handle events and ticks one at a time, so a raise finishes before the next decision. */
  private serial(fn: () => Promise<void> | void): Promise<void> {
    const next = this.work.then(fn).catch((err) => this.d.log.warn({ err }, 'alert engine step failed'));
    this.work = next;
    return next;
  }

  /** Resolves once every event and tick so far has been handled (tests). */
  idle(): Promise<unknown> {
    return this.work;
  }

  private async loadWiring() {
    const r = await this.d.db.execute<Record<string, unknown>>(sql`
      select c.id as controller_id, s.name as site_name, s.rain_delay_hours, z.id as zone_id, z.relay, z.name as zone_name,
        z.head_count * z.flow_per_head_lpm as flow
      from controllers c join sites s on s.id = c.site_id left join zones z on z.controller_id = c.id`);
    const w = new Map<number, Wiring>();
    for (const x of r.rows) {
      const id = Number(x.controller_id);
      if (!w.has(id)) w.set(id, { siteName: String(x.site_name), rainDelayHours: Number(x.rain_delay_hours), zones: new Map() });
      if (x.zone_id !== null) w.get(id)!.zones.set(Number(x.relay), { zoneId: Number(x.zone_id), name: String(x.zone_name), flowLpm: Number(x.flow) });
    }
    this.wiring = w;
    this.wiringAt = this.d.clock.now();
  }

  private async raise(input: RaiseInput) {
    this.sustain.live.add(episodeKey(input.kind, input.subject));
    await this.d.store.raise(input);
  }

  private async resolve(kind: AlertKind, subject: string, why: string) {
    this.sustain.forget(episodeKey(kind, subject));
    await this.d.store.resolve(kind, subject, why);
  }

  private isLive(kind: AlertKind, subject: string) {
    return this.sustain.live.has(episodeKey(kind, subject));
  }

  /** Act on a Sustain decision for one condition. */
  private async decide(kind: AlertKind, subject: string, holds: boolean | null, raiseAfter: number, clearAfter: number, input: () => RaiseInput, why: string) {
    const key = episodeKey(kind, subject);
    const d = this.sustain.observe(key, holds, this.d.clock.now(), raiseAfter, clearAfter);
    if (d === 'raise') await this.d.store.raise(input());
    else if (d === 'resolve') await this.d.store.resolve(kind, subject, why);
  }

  private async onEvent(e: LiveEvent) {
    if (this.stopped) return;
    const now = this.d.clock.now();
    switch (e.type) {
      case 'controller': {
        const c = e as ControllerLiveEvent;
        if (!c.online) this.offlineSince.set(c.controllerId, now);
        else {
          this.offlineSince.delete(c.controllerId);
          if (this.isLive('controller_offline', `controller:${c.controllerId}`)) await this.resolve('controller_offline', `controller:${c.controllerId}`, 'The controller is back online');
        }
        return;
      }
      case 'valve': {
        const v = e as { controllerId: number; open: boolean; relay: number };
        this.relayChangedAt.set(v.controllerId, now);
        if (!v.open && this.isLive('valve_stuck_open', `controller:${v.controllerId}:relay:${v.relay}`)) {
          await this.resolve('valve_stuck_open', `controller:${v.controllerId}:relay:${v.relay}`, 'The board reports the valve closed');
        }
        return;
      }
      case 'command': {
        const c = e as CommandLiveEvent;
        const subject = `controller:${c.controllerId}`;
        if (c.state === 'failed') {
          if (this.isLive('command_failed', subject)) return;
          const b = this.d.fleet.getById(c.controllerId);
          const zone = c.zoneId ? [...(this.wiring.get(c.controllerId)?.zones.values() ?? [])].find((z) => z.zoneId === c.zoneId) : undefined;
          await this.raise({
            kind: 'command_failed', subject, siteId: c.siteId, controllerId: c.controllerId, zoneId: c.zoneId,
            title: `${b?.name ?? 'A controller'} did not carry out a command`,
            message: `${zone ? `Opening ${zone.name}` : 'A command'} failed: ${c.message ?? 'no acknowledgement'}. Check that the board is powered and in Wi-Fi range.`,
            details: { commandId: c.commandId, op: c.op, error: c.message ?? null },
          });
        } else if (c.state === 'acked' && this.isLive('command_failed', subject)) {
          await this.resolve('command_failed', subject, 'The controller acknowledged a command again');
        }
        return;
      }
      case 'rain': {
        const r = e as RainLiveEvent;
        if (!r.tripped) {
          this.rainDryAt.set(r.siteId, now);
          return;
        }
        this.rainDryAt.delete(r.siteId);
        if (this.isLive('rain_hold', `site:${r.siteId}`)) return;
        const w = this.wiring.get(r.controllerId);
        const b = this.d.fleet.getById(r.controllerId);
        await this.raise({
          kind: 'rain_hold', subject: `site:${r.siteId}`, siteId: r.siteId, controllerId: r.controllerId,
          title: `Rain hold at ${w?.siteName ?? 'a site'}`,
          message: `The rain sensor on ${b?.name ?? 'a controller'} is wet. Running zones were closed and scheduled watering is held until it dries${w ? ` and the site’s rain delay of ${w.rainDelayHours} h has passed` : ''}.`,
        });
        return;
      }
      case 'reading':
        await this.onReading(e as ReadingLiveEvent, now);
        return;
    }
  }

  private async onReading(e: ReadingLiveEvent, now: number) {
    const b = this.d.fleet.getById(e.controllerId);
    if (!b) return;
    const subject = `controller:${b.controllerId}`;
    const wasLow = this.isLive('low_voltage', subject);
    await this.decide('low_voltage', subject, voltageLow(e.supplyV, this.s.lowVoltageV, wasLow), this.s.voltageMs, this.s.voltageMs, () => ({
      kind: 'low_voltage', subject, siteId: b.siteId, controllerId: b.controllerId,
      title: `Low supply voltage at ${b.name}`,
      message: `The supply reads ${e.supplyV.toFixed(1)} V, below ${this.s.lowVoltageV} V. Check the transformer and its wiring: valves may not open reliably.`,
      details: { supplyV: e.supplyV, thresholdV: this.s.lowVoltageV },
    }), 'The supply voltage is back to normal');
    if (b.hasFlowSensor && e.flowLpm !== null) await this.judgeFlow(b, e.flowLpm, now);
  }

  private async judgeFlow(b: BoardLive, flow: number, now: number) {
    if (now - (this.relayChangedAt.get(b.controllerId) ?? 0) < this.s.settleMs) return;
    const w = this.wiring.get(b.controllerId);
    const open = b.relays.map((r, i) => ({ relay: i + 1, open: r.open })).filter((r) => r.open);
    const master = b.masterValveRelay;
    const zonesOpen = open.filter((r) => r.relay !== master).map((r) => w?.zones.get(r.relay)).filter((z): z is ZoneInfo => !!z);
    const ctl = `controller:${b.controllerId}`;
    if (open.length === 0) {
      await this.decide('flow_while_closed', ctl, flow > this.s.leakLpm, this.s.flowMs, this.s.flowMs, () => ({
        kind: 'flow_while_closed', subject: ctl, siteId: b.siteId, controllerId: b.controllerId,
        title: `Water flowing at ${b.name} with every valve closed`,
        message: `The flow sensor reads ${r1(flow)} L/min while every valve is closed: a leak, or a valve that does not seal. Close the supply if water is being lost.`,
        details: { flowLpm: flow },
      }), 'No flow with the valves closed any more');
      return;
    }
    if (master && !open.some((r) => r.relay === master)) return;
    const expected = zonesOpen.reduce((t, z) => t + z.flowLpm, 0);
    if (!zonesOpen.length || expected <= 0) return;
    const verdict = flowVerdict(flow, expected, this.s.highRatio, this.s.lowRatio);
    const one = zonesOpen.length === 1 ? zonesOpen[0] : null;
    const subject = one ? `zone:${one.zoneId}` : ctl;
    const what = one ? one.name : `${zonesOpen.map((z) => z.name).join(', ')} on ${b.name}`;
    const base = { siteId: b.siteId, controllerId: b.controllerId, zoneId: one?.zoneId ?? null, details: { flowLpm: flow, expectedLpm: r1(expected), ratio: r1(flow / expected) } };
    await this.decide('high_flow', subject, verdict === 'high', this.s.flowMs, this.s.flowMs, () => ({
      ...base, kind: 'high_flow', subject,
      title: `High flow on ${what}`,
      message: `Flow is ${r1(flow)} L/min, ${r1(flow / expected)} × the nominal ${r1(expected)} L/min: a broken head or pipe?`,
    }), 'Flow is back to normal');
    await this.decide('low_flow', subject, verdict === 'low', this.s.flowMs, this.s.flowMs, () => ({
      ...base, kind: 'low_flow', subject,
      title: `Low flow on ${what}`,
      message: `Flow is ${r1(flow)} L/min, ${r1(flow / expected)} × the nominal ${r1(expected)} L/min: a clogged filter or nozzle, or low pressure?`,
    }), 'Flow is back to normal');
  }

  /** Is this relay open because the server asked for it (or someone pressed the board's button)? */
  private expectedOpen(b: BoardLive, relay: number, now: number): boolean {
    const act = this.d.dispatcher.siteActivity(b.siteId).active.filter((a) => a.controllerId === b.controllerId);
    if (relay === b.masterValveRelay) return act.some((a) => a.state !== 'closing');
    const a = act.find((x) => x.relay === relay);
    if (!a || a.state === 'closing') return false;
    return !(a.plannedEnd && now > a.plannedEnd);
  }

  private async tick() {
    if (this.stopped) return;
    const now = this.d.clock.now();
    if (now - this.wiringAt > 30_000) await this.loadWiring();
    for (const b of this.d.fleet.all()) {
      const w = this.wiring.get(b.controllerId);
      const ctl = `controller:${b.controllerId}`;
      if (!b.online && b.lastSeenAt !== null) {
        const since = Math.max(this.offlineSince.get(b.controllerId) ?? b.lastSeenAt, this.startedAt);
        if (now - since >= this.s.offlineMs && !this.isLive('controller_offline', ctl)) {
          await this.raise({
            kind: 'controller_offline', subject: ctl, siteId: b.siteId, controllerId: b.controllerId,
            title: `${b.name} is offline`,
            message: `No contact with ${b.name}${w ? ` at ${w.siteName}` : ''} since ${when(b.lastSeenAt)}. Check its power and Wi-Fi. It still closes valves by itself, but scheduled runs cannot start until it is back.`,
            details: { lastSeenAt: new Date(b.lastSeenAt).toISOString() },
          });
        }
      }
      if (b.online && this.isLive('controller_offline', ctl)) await this.resolve('controller_offline', ctl, 'The controller is back online');
      if (!b.online) continue;
      for (let i = 0; i < b.relays.length; i++) {
        const relay = i + 1;
        const subject = `${ctl}:relay:${relay}`;
        const open = b.relays[i].open;
        if (!open && !this.isLive('valve_stuck_open', subject)) continue;
        const zone = w?.zones.get(relay);
        await this.decide('valve_stuck_open', subject, open && !this.expectedOpen(b, relay, now), this.s.stuckMs, 0, () => ({
          kind: 'valve_stuck_open', subject, siteId: b.siteId, controllerId: b.controllerId, zoneId: zone?.zoneId ?? null,
          title: `${relay === b.masterValveRelay ? 'Master valve' : (zone?.name ?? `Relay ${relay}`)} is open and should be closed`,
          message: `${b.name} reports relay ${relay}${zone ? ` (${zone.name})` : ''} open, but Runnel has not asked for it to be open. Water may be running: check the valve, and close the supply if it does not shut.`,
          details: { relay },
        }), 'The board reports the valve closed');
      }
    }
    await this.checkRainHolds(now);
  }

  /** A rain hold ends when no sensor at the site is wet and the site's rain delay after drying has passed. */
  private async checkRainHolds(now: number) {
    const live = [...this.sustain.live].filter((k) => k.startsWith('rain_hold:site:')).map((k) => Number(k.split(':')[2]));
    for (const siteId of live) {
      if (this.d.fleet.ofSite(siteId).some((b) => b.rain)) continue;
      const r = await this.d.db.execute<{ rain_cleared_at: string | null; rain_delay_hours: number; opened_at: string | null }>(sql`
        select s.rain_cleared_at, s.rain_delay_hours,
          (select opened_at from alerts where episode_key = ${episodeKey('rain_hold', `site:${siteId}`)} and state <> 'resolved') as opened_at
        from sites s where s.id = ${siteId}`);
      const row = r.rows[0];
      if (!row) continue;
      const clearedAt = ms(row.rain_cleared_at);
      const openedAt = ms(row.opened_at);
      const cleared = clearedAt !== null && (openedAt === null || clearedAt >= openedAt) ? clearedAt : null;
      const dry = this.rainDryAt.get(siteId);
      // Without a scheduler to record the drying, fall back to when this server saw it dry.
      const from = cleared ?? (dry !== undefined && now - dry > 30_000 ? dry : null);
      if (from === null) continue;
      if (now >= from + Number(row.rain_delay_hours) * 3_600_000) {
        await this.resolve('rain_hold', `site:${siteId}`, 'The rain hold has ended: the sensor is dry and the rain delay has passed');
      }
    }
  }
}
