import { DateTime } from 'luxon';
import type { Db } from '../db/client';
import type { Site } from '../db/schema/index';
import { badRequest } from '../errors';
import type { Actor } from '../services/actor';
import { loadVisibleSite } from '../services/sites';
import type { WaterBasis, WaterUseBucket, WaterUsePoint, WaterUseQuery, WaterUseResponse } from '../contracts/history';
import { siteDailyUse, siteWeather, siteZones, zoneDemandMm, type DayUse, type WeatherFacts, type ZoneFacts } from './site-data';
import { addDays, dateRange, daysBetween, round, todayAt } from './sql';

type Ctx = { db: Db; actor: Actor; now: number };

/** Longest range per bucket, in days. */
const MAX_DAYS: Record<WaterUseBucket, number> = { day: 731, week: 3 * 366, month: 10 * 366 };

export function bucketStart(date: string, bucket: WaterUseBucket): string {
  if (bucket === 'day') return date;
  const d = DateTime.fromISO(date, { zone: 'UTC' });
  return (bucket === 'week' ? d.startOf('week') : d.startOf('month')).toISODate()!;
}

function nextBucket(start: string, bucket: WaterUseBucket): string {
  if (bucket === 'day') return addDays(start, 1);
  const d = DateTime.fromISO(start, { zone: 'UTC' });
  return (bucket === 'week' ? d.plus({ weeks: 1 }) : d.plus({ months: 1 })).toISODate()!;
}

function prevBucket(start: string, bucket: WaterUseBucket): string {
  if (bucket === 'day') return addDays(start, -1);
  const d = DateTime.fromISO(start, { zone: 'UTC' });
  return (bucket === 'week' ? d.minus({ weeks: 1 }) : d.minus({ months: 1 })).toISODate()!;
}

function defaultFrom(to: string, bucket: WaterUseBucket): string {
  if (bucket === 'day') return addDays(to, -29);
  if (bucket === 'week') return bucketStart(addDays(to, -7 * 11), 'week');
  return DateTime.fromISO(to, { zone: 'UTC' }).startOf('month').minus({ months: 11 }).toISODate()!;
}

export function basisOf(measured: number, estimated: number, runs: number): WaterBasis {
  if (runs === 0 && measured === 0 && estimated === 0) return 'none';
  if (measured > 0 && estimated > 0) return 'mixed';
  return measured > 0 ? 'measured' : 'estimated';
}

type Totals = WaterUseResponse['totals'];

/**
 * Day-by-day figures of a set of zones laid out in arrays (index = day), so that any bucket or
 * total is a sum over an index range.
 */
export class DayGrid {
  readonly dates: string[];
  private index = new Map<string, number>();
  private cols: { litres: Float64Array; measured: Float64Array; estimated: Float64Array; runs: Float64Array; minutes: Float64Array; demandLitres: Float64Array }[];
  private et0: Float64Array;
  private rain: Float64Array;
  private eff: Float64Array;
  private has: Uint8Array;

  constructor(readonly zones: ZoneFacts[], from: string, to: string, use: Map<number, Map<string, DayUse>>, wx: Map<string, WeatherFacts>, site: Pick<Site, 'latitude'>) {
    this.dates = dateRange(from, to);
    const n = this.dates.length;
    this.dates.forEach((d, i) => this.index.set(d, i));
    this.et0 = new Float64Array(n);
    this.rain = new Float64Array(n);
    this.eff = new Float64Array(n);
    this.has = new Uint8Array(n);
    this.dates.forEach((d, i) => {
      const w = wx.get(d);
      if (!w) return;
      this.has[i] = 1;
      this.et0[i] = w.et0Mm;
      this.rain[i] = w.rainMm;
      this.eff[i] = w.effectiveRainMm;
    });
    this.cols = zones.map((z) => {
      const c = { litres: new Float64Array(n), measured: new Float64Array(n), estimated: new Float64Array(n), runs: new Float64Array(n), minutes: new Float64Array(n), demandLitres: new Float64Array(n) };
      for (const [d, u] of use.get(z.id) ?? []) {
        const i = this.index.get(d);
        if (i === undefined) continue;
        c.litres[i] = u.litres;
        c.measured[i] = u.measuredLitres;
        c.estimated[i] = u.estimatedLitres;
        c.runs[i] = u.runs;
        c.minutes[i] = u.minutes;
      }
      this.dates.forEach((d, i) => {
        if (this.has[i]) c.demandLitres[i] = zoneDemandMm(z, site, d, this.et0[i]) * z.areaM2;
      });
      return c;
    });
  }

  at(date: string): number {
    return this.index.get(date)!;
  }

  /** Sum zones (indexes into `zones`) over days i0…i1 inclusive. */
  sum(zoneIdx: number[], i0: number, i1: number): Totals {
    let litres = 0, measured = 0, estimated = 0, runs = 0, minutes = 0, demandLitres = 0, et0 = 0, rain = 0, eff = 0, weatherDays = 0;
    let area = 0;
    for (const k of zoneIdx) {
      area += this.zones[k].areaM2;
      const c = this.cols[k];
      for (let i = i0; i <= i1; i++) {
        litres += c.litres[i];
        measured += c.measured[i];
        estimated += c.estimated[i];
        runs += c.runs[i];
        minutes += c.minutes[i];
        demandLitres += c.demandLitres[i];
      }
    }
    for (let i = i0; i <= i1; i++) {
      if (!this.has[i]) continue;
      weatherDays++;
      et0 += this.et0[i];
      rain += this.rain[i];
      eff += this.eff[i];
    }
    const has = weatherDays > 0;
    return {
      litres: round(litres, 1),
      measuredLitres: round(measured, 1),
      estimatedLitres: round(estimated, 1),
      basis: basisOf(measured, estimated, runs),
      appliedMm: area > 0 ? round(litres / area, 2) : 0,
      demandMm: has && area > 0 ? round(demandLitres / area, 2) : null,
      demandLitres: has ? round(demandLitres, 1) : null,
      et0Mm: has ? round(et0, 2) : null,
      rainMm: has ? round(rain, 2) : null,
      effectiveRainMm: has ? round(eff, 2) : null,
      weatherDays,
      runs,
      minutes: round(minutes, 2),
    };
  }
}

/** Sum a set of zones over a run of consecutive dates (the weekly mail uses this). */
export function sumPoint(zones: ZoneFacts[], dates: string[], use: Map<number, Map<string, DayUse>>, wx: Map<string, WeatherFacts>, site: Pick<Site, 'latitude'>): Totals {
  const g = new DayGrid(zones, dates[0], dates[dates.length - 1], use, wx, site);
  return g.sum(zones.map((_, i) => i), 0, g.dates.length - 1);
}

type Bucket = { start: string; end: string; i0: number; i1: number };

function seriesOf(g: DayGrid, zoneIdx: number[], buckets: Bucket[], prev: { i0: number; i1: number }): WaterUsePoint[] {
  let previous = g.sum(zoneIdx, prev.i0, prev.i1).litres;
  return buckets.map((b) => {
    const t = g.sum(zoneIdx, b.i0, b.i1);
    const p: WaterUsePoint = {
      period: b.start,
      periodEnd: b.end,
      ...t,
      previousLitres: previous,
      changePct: previous > 0 ? round(((t.litres - previous) / previous) * 100, 1) : null,
    };
    previous = t.litres;
    return p;
  });
}

/** Water use of a site (and each of its zones) per day, week or month, against plant demand and rain. */
export async function siteWaterUse(ctx: Ctx, q: WaterUseQuery): Promise<WaterUseResponse> {
  const site = await loadVisibleSite(ctx, q.siteId);
  const to = q.to ?? todayAt(ctx.now, site.timezone);
  const from = q.from ?? defaultFrom(to, q.bucket);
  if (from > to) throw badRequest('“from” must not be after “to”');
  if (daysBetween(from, to) + 1 > MAX_DAYS[q.bucket]) throw badRequest(`At most ${MAX_DAYS[q.bucket]} days at a time per ${q.bucket}`);

  const prevStart = prevBucket(bucketStart(from, q.bucket), q.bucket);
  const [zones, use, wx] = await Promise.all([
    siteZones(ctx.db, site.id, q.zoneId),
    siteDailyUse(ctx.db, site.id, prevStart, to, q.zoneId),
    siteWeather(ctx.db, site.id, prevStart, to),
  ]);
  const g = new DayGrid(zones, prevStart, to, use, wx, site);
  const buckets: Bucket[] = [];
  for (let s = bucketStart(from, q.bucket); s <= to; s = nextBucket(s, q.bucket)) {
    const lo = s < from ? from : s;
    const last = addDays(nextBucket(s, q.bucket), -1);
    const hi = last > to ? to : last;
    buckets.push({ start: lo, end: hi, i0: g.at(lo), i1: g.at(hi) });
  }
  const prev = { i0: 0, i1: g.at(from) - 1 };
  const all = zones.map((_, i) => i);
  const whole = { i0: g.at(from), i1: g.at(to) };
  return {
    site: { id: site.id, name: site.name, timezone: site.timezone, areaM2: round(zones.reduce((t, z) => t + z.areaM2, 0), 2) },
    from,
    to,
    bucket: q.bucket,
    series: seriesOf(g, all, buckets, prev),
    totals: g.sum(all, whole.i0, whole.i1),
    zones: zones.map((z, k) => ({
      zoneId: z.id,
      name: z.name,
      areaM2: z.areaM2,
      plantType: z.plantType,
      hasFlowSensor: z.hasFlowSensor,
      series: seriesOf(g, [k], buckets, prev),
      totals: g.sum([k], whole.i0, whole.i1),
    })),
  };
}
