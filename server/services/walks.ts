import { randomUUID } from 'node:crypto';
import { and, eq, inArray } from 'drizzle-orm';
import type { Db } from '../db/client';
import { controllers, serviceRecords, zones } from '../db/schema/index';
import { walkSchema, walkStepSchema } from '../contracts/programs';
import { AppError, conflict, forbidden, notFound } from '../errors';
import { parse } from '../middleware/validate';
import { siteHold } from '../scheduler/holds';
import type { Clock } from '../clock';
import type { Services } from './registry';
import { canSeeSite, type Actor } from './actor';
import { recordAudit } from './audit';
import { loadVisibleSite } from './sites';

export type WalkResult = {
  zoneId: number;
  zoneName: string;
  opened: boolean;
  acknowledged: boolean;
  flowSeenLpm: number | null;
  expectedFlowLpm: number;
  startedAt: string | null;
  endedAt: string | null;
  outcome: 'pending' | 'ok' | 'failed' | 'skipped';
  error?: string;
};

type Walk = {
  id: string;
  siteId: number;
  actor: Actor;
  minutes: number;
  zones: { id: number; name: string; controllerId: number; flowLpm: number; hasFlowSensor: boolean }[];
  index: number;
  state: 'running' | 'done' | 'stopped';
  results: WalkResult[];
  startedAt: number;
  currentEndsAt: number | null;
  /** Bumped on every step, so a late outcome of an older step is ignored. */
  generation: number;
};

/**
 * A technician's walk through a site: one zone at a time for M minutes, with next / back /
 * extend / stop. Each zone's result (opened, acknowledged, flow seen) is saved as a service record.
 */
export class WalkService {
  private walks = new Map<string, Walk>();
  private unsubscribe: () => void;

  constructor(
    private db: Db,
    private s: Services,
    private clock: Clock,
  ) {
    // Watch readings for the flow each walked zone shows.
    this.unsubscribe = s.bus.subscribe((e) => {
      if (e.type !== 'reading') return;
      const ev = e as { controllerId: number; flowLpm: number | null };
      for (const w of this.walks.values()) {
        if (w.state !== 'running') continue;
        const z = w.zones[w.index];
        const r = w.results[w.index];
        if (z && r && r.opened && z.controllerId === ev.controllerId && ev.flowLpm !== null) r.flowSeenLpm = Math.max(r.flowSeenLpm ?? 0, ev.flowLpm);
      }
    });
  }

  close() {
    this.unsubscribe();
  }

  private view(w: Walk) {
    return {
      id: w.id, siteId: w.siteId, minutes: w.minutes, state: w.state, index: w.index, total: w.zones.length,
      current: w.state === 'running' ? w.zones[w.index] : null,
      currentEndsAt: w.currentEndsAt ? new Date(w.currentEndsAt).toISOString() : null,
      results: w.results,
    };
  }

  private emit(w: Walk) {
    this.s.bus.publish({ type: 'walk', siteId: w.siteId, walk: this.view(w) });
  }

  async start(actor: Actor, siteId: number, raw: unknown) {
    const site = await loadVisibleSite({ db: this.db, actor }, siteId);
    if (actor.role === 'owner') throw forbidden('Owners may not run a walk test');
    const input = parse(walkSchema, raw);
    const rows = await this.db
      .select({ zone: zones, ctrl: controllers })
      .from(zones)
      .innerJoin(controllers, eq(zones.controllerId, controllers.id))
      .where(and(inArray(zones.id, input.zoneIds), eq(controllers.siteId, siteId)));
    const missing = input.zoneIds.filter((id) => !rows.some((r) => r.zone.id === id));
    if (missing.length) throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'zoneIds', message: `Zones ${missing.join(', ')} are not at this site` }]);
    const hold = await siteHold(this.db, this.s.fleet, site, this.clock.now());
    if (hold && !(actor.role === 'technician' && input.overrideHold)) throw conflict('rain_hold', `${hold.reason}. A technician may walk the site with the hold override.`);
    if (hold) await recordAudit(this.db, actor, { action: 'walk.hold_override', entityType: 'site', entityId: siteId, siteId, outcome: 'override', after: { hold: hold.reason } });
    const ordered = input.zoneIds.map((id) => rows.find((r) => r.zone.id === id)!);
    const w: Walk = {
      id: randomUUID(), siteId, actor, minutes: input.minutes, index: 0, state: 'running', startedAt: this.clock.now(), currentEndsAt: null, generation: 0,
      zones: ordered.map((r) => ({ id: r.zone.id, name: r.zone.name, controllerId: r.ctrl.id, flowLpm: r.zone.headCount * r.zone.flowPerHeadLpm, hasFlowSensor: r.ctrl.hasFlowSensor })),
      results: ordered.map((r) => ({ zoneId: r.zone.id, zoneName: r.zone.name, opened: false, acknowledged: false, flowSeenLpm: null, expectedFlowLpm: r.zone.headCount * r.zone.flowPerHeadLpm, startedAt: null, endedAt: null, outcome: 'pending' })),
    };
    this.walks.set(w.id, w);
    await recordAudit(this.db, actor, { action: 'walk.start', entityType: 'site', entityId: siteId, siteId, after: { zoneIds: input.zoneIds, minutes: input.minutes } });
    await this.openCurrent(w);
    return this.view(w);
  }

  get(actor: Actor, id: string) {
    const w = this.walks.get(id);
    if (!w || !canSeeSite(actor, w.siteId)) throw notFound('Walk');
    return this.view(w);
  }

  private async openCurrent(w: Walk, minutes = w.minutes) {
    const z = w.zones[w.index];
    const r = w.results[w.index];
    const gen = ++w.generation;
    r.startedAt = new Date(this.clock.now()).toISOString();
    r.outcome = 'pending';
    w.currentEndsAt = this.clock.now() + minutes * 60_000;
    try {
      await this.s.dispatcher.start({
        zoneId: z.id, seconds: minutes * 60, origin: 'walk', actor: w.actor,
        onOutcome: (o) => {
          if (gen !== w.generation) return;
          if (o.kind === 'opened') {
            r.acknowledged = true;
            const loc = this.s.fleet.relayOfZone(z.id);
            r.opened = !!loc && !!loc.board.relays[loc.relay - 1]?.open;
            this.emit(w);
          } else if (o.kind === 'failed') {
            r.outcome = 'failed';
            r.error = o.error;
            r.endedAt = new Date(o.at).toISOString();
            this.emit(w);
          } else if (o.kind === 'closed' && o.why === 'completed' && w.state === 'running') {
            // time is up: move on by itself
            void this.step(w.actor, w.id, { action: 'next' }).catch(() => {});
          }
        },
      });
    } catch (e) {
      r.outcome = 'failed';
      r.error = (e as Error).message;
    }
    // The valve event usually lands just before the acknowledgement; look once more shortly after.
    this.clock.setTimeout(() => {
      const loc = this.s.fleet.relayOfZone(z.id);
      if (gen === w.generation && loc?.board.relays[loc.relay - 1]?.open) {
        r.opened = true;
        this.emit(w);
      }
    }, 1500);
    this.emit(w);
  }

  private async closeCurrent(w: Walk) {
    const z = w.zones[w.index];
    const r = w.results[w.index];
    w.generation++;
    await this.s.dispatcher.close(z.id, w.siteId, 'stopped', w.actor).catch(() => false);
    r.endedAt = new Date(this.clock.now()).toISOString();
    if (r.outcome === 'pending') {
      const flowOk = !z.hasFlowSensor || (r.flowSeenLpm !== null && r.flowSeenLpm > 0);
      r.outcome = r.acknowledged && r.opened && flowOk ? 'ok' : 'failed';
      if (r.outcome === 'failed' && !r.error) r.error = !r.acknowledged ? 'The board did not acknowledge' : !r.opened ? 'The valve was not seen open' : 'No flow seen';
    }
  }

  async step(actor: Actor, id: string, raw: unknown) {
    const w = this.walks.get(id);
    if (!w || !canSeeSite(actor, w.siteId)) throw notFound('Walk');
    if (actor.role === 'owner') throw forbidden('Owners may not run a walk test');
    const input = parse(walkStepSchema, raw);
    if (w.state !== 'running') throw conflict('walk_finished', 'This walk has finished');
    if (input.action === 'extend') {
      const minutes = input.minutes ?? w.minutes;
      await this.s.dispatcher.start({ zoneId: w.zones[w.index].id, seconds: Math.round((((w.currentEndsAt ?? this.clock.now()) - this.clock.now()) / 1000) + minutes * 60), origin: 'walk', actor });
      w.currentEndsAt = (w.currentEndsAt ?? this.clock.now()) + minutes * 60_000;
      this.emit(w);
      return this.view(w);
    }
    await this.closeCurrent(w);
    if (input.action === 'stop' || (input.action === 'next' && w.index === w.zones.length - 1)) {
      w.state = input.action === 'stop' ? 'stopped' : 'done';
      for (const r of w.results) if (r.outcome === 'pending') r.outcome = 'skipped';
      w.currentEndsAt = null;
      await this.save(w);
      this.emit(w);
      return this.view(w);
    }
    w.index = input.action === 'back' ? Math.max(0, w.index - 1) : w.index + 1;
    await this.openCurrent(w);
    return this.view(w);
  }

  private async save(w: Walk) {
    await this.db.insert(serviceRecords).values(
      w.results.map((r) => ({
        siteId: w.siteId, zoneId: r.zoneId, kind: 'walk_test', authorId: w.actor.userId || null,
        summary: r.outcome === 'ok' ? `Walk test: opened${r.flowSeenLpm !== null ? `, ${r.flowSeenLpm.toFixed(1)} L/min seen` : ''}` : r.outcome === 'skipped' ? 'Walk test: not reached' : `Walk test failed: ${r.error ?? 'unknown'}`,
        details: { ...r, walkId: w.id, minutes: w.minutes },
      })),
    );
    await recordAudit(this.db, w.actor, { action: 'walk.finish', entityType: 'site', entityId: w.siteId, siteId: w.siteId, after: { walkId: w.id, results: w.results.map((r) => ({ zoneId: r.zoneId, outcome: r.outcome })) } });
  }
}
