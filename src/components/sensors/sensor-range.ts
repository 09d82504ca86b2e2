import { z } from 'zod';
import type { ValveMark } from '../../../server/contracts/history';
import { addIsoDays } from '../weather/dates';
import { siteToday, siteWallToEpoch } from '../schedule/site-time';

/** The ranges of the sensor history screen, and what to make of the buckets and valve marks. */

const HOUR = 3_600_000;
const DAY = 24 * HOUR;

export const rangePresets = [
  { key: '24h', label: '24 h', words: 'the last 24 hours', ms: DAY },
  { key: '7d', label: '7 days', words: 'the last 7 days', ms: 7 * DAY },
  { key: '30d', label: '30 days', words: 'the last 30 days', ms: 30 * DAY },
  { key: '1y', label: '1 year', words: 'the last year', ms: 365 * DAY },
] as const;

export type PresetKey = (typeof rangePresets)[number]['key'];
export type RangeKey = PresetKey | 'custom';

/** The server reads at most two years (of 366 days) at a time. */
export const MAX_RANGE_DAYS = 732;

const isoDay = z.string().regex(/^\d{4}-\d{2}-\d{2}$/, 'Pick a date');

/** Custom dates, local days at the site, both inclusive. */
export const customRangeSchema = z
  .object({ from: isoDay, to: isoDay })
  .refine((r) => r.from <= r.to, { path: ['to'], message: '“To” must not be before “From”' })
  .refine((r) => dayCount(r.from, r.to) <= MAX_RANGE_DAYS, { path: ['to'], message: 'At most two years at a time' });

/** What the page keeps in its address: ?range=7d, or ?range=custom&from=…&to=…, and ?zone=… */
export const sensorQuerySchema = z.object({
  range: z.enum(['24h', '7d', '30d', '1y', 'custom']).catch('24h'),
  from: isoDay.optional().catch(undefined),
  to: isoDay.optional().catch(undefined),
  zone: z.coerce.number().int().positive().optional().catch(undefined),
});
export type SensorQuery = z.infer<typeof sensorQuerySchema>;

function dayCount(from: string, to: string): number {
  return Math.round((Date.parse(`${to}T00:00:00Z`) - Date.parse(`${from}T00:00:00Z`)) / DAY) + 1;
}

/** The instants [from, to) a choice covers: a preset ends now; custom days run from midnight to midnight at the site. */
export function rangeBounds(q: Pick<SensorQuery, 'range' | 'from' | 'to'>, timeZone: string, nowMs: number): { from: number; to: number } {
  if (q.range === 'custom' && q.from && q.to) {
    return { from: siteWallToEpoch(q.from, '00:00', timeZone), to: siteWallToEpoch(addIsoDays(q.to, 1), '00:00', timeZone) };
  }
  const preset = rangePresets.find((p) => p.key === q.range) ?? rangePresets[0];
  return { from: nowMs - preset.ms, to: nowMs };
}

/** Custom dates to start from: the last seven days at the site. */
export function defaultCustomDays(timeZone: string, nowMs: number): { from: string; to: string } {
  const to = siteToday(timeZone, nowMs);
  return { from: addIsoDays(to, -6), to };
}

/** The shortest preset that shows an instant with an hour before it (an alert's readings), else those days. */
export function rangeAround(atMs: number, nowMs: number, timeZone: string): Pick<SensorQuery, 'range' | 'from' | 'to'> {
  const since = nowMs - (atMs - HOUR);
  const preset = rangePresets.find((p) => since <= p.ms);
  if (preset) return { range: preset.key };
  const day = siteToday(timeZone, atMs);
  return { range: 'custom', from: addIsoDays(day, -1), to: addIsoDays(day, 1) };
}

/** "3 min", "2 h", "1 day": the length of one bucket. */
export function spanWords(ms: number): string {
  const s = Math.round(ms / 1000);
  if (s < 120) return `${s} s`;
  if (s < 600) return s % 60 ? `${Math.floor(s / 60)} min ${s % 60} s` : `${s / 60} min`;
  const min = s / 60;
  if (min < 120) return `${Math.round(min)} min`;
  const h = min / 60;
  if (h < 48) return `${Math.round(h)} h`;
  const d = Math.round(h / 24);
  return `${d} ${d === 1 ? 'day' : 'days'}`;
}

/** A span of time as a technician says it: "12 min", "1 h 5 min", "45 s". */
export function durationWords(ms: number): string {
  const s = Math.max(0, Math.round(ms / 1000));
  if (s < 60) return `${s} s`;
  const m = Math.round(s / 60);
  if (m < 60) return `${m} min`;
  const h = Math.floor(m / 60);
  return m % 60 ? `${h} h ${m % 60} min` : `${h} h`;
}

/** How the points were made, in words; null when every reading is its own point. */
export function samplingWords(bucketMs: number, maxPerBucket: number): string | null {
  if (maxPerBucket <= 1) return null;
  return `Downsampled: one point per ${spanWords(bucketMs)}, the average of up to ${maxPerBucket.toLocaleString()} readings; the band spans the lowest to the highest.`;
}

/** One valve open: a relay's open mark to its close mark, cut to the range. */
export type ValveSpan = {
  relay: number;
  zoneId: number | null;
  start: number;
  end: number;
  /** Opened before the range began (its open mark is not in it). */
  openedBefore: boolean;
  /** Still open at the end of the range. */
  stillOpen: boolean;
  /** Who opened it (null when it opened before the range) and who closed it (null while open). */
  openedBy: string | null;
  closedBy: string | null;
};

/**
 * Pair each relay's open and close marks into spans. A close with no open before it in the range
 * began before the range; an open with no close after it is still open at its end. A second open
 * mark while open (a board repeating itself) changes nothing.
 */
export function valveSpans(marks: readonly ValveMark[], fromMs: number, toMs: number): ValveSpan[] {
  const open = new Map<number, { at: number; zoneId: number | null; source: string }>();
  const spans: ValveSpan[] = [];
  const sorted = [...marks].sort((a, b) => Date.parse(a.at) - Date.parse(b.at));
  for (const m of sorted) {
    const at = Date.parse(m.at);
    const was = open.get(m.relay);
    if (m.open) {
      if (!was) open.set(m.relay, { at, zoneId: m.zoneId, source: m.source });
      continue;
    }
    if (was) {
      spans.push({ relay: m.relay, zoneId: was.zoneId ?? m.zoneId, start: was.at, end: at, openedBefore: false, stillOpen: false, openedBy: was.source, closedBy: m.source });
      open.delete(m.relay);
    } else {
      spans.push({ relay: m.relay, zoneId: m.zoneId, start: fromMs, end: at, openedBefore: true, stillOpen: false, openedBy: null, closedBy: m.source });
    }
  }
  for (const [relay, o] of open) {
    spans.push({ relay, zoneId: o.zoneId, start: o.at, end: Math.max(o.at, toMs), openedBefore: false, stillOpen: true, openedBy: o.source, closedBy: null });
  }
  return spans.sort((a, b) => a.start - b.start || a.relay - b.relay);
}

/** One bucket of one quantity, already in the unit shown. */
export type BandPoint = { t: number; avg: number; lo: number; hi: number; n: number };
/** A row of the valve chart, and one opening drawn in it. */
export type Lane = { label: string; highlight: boolean };
export type LaneSpan = { lane: number; start: number; end: number; stillOpen: boolean };

/**
 * Points for a line with gaps: a null where two points are much further apart than usual (more
 * than two and a half times the larger of one bucket and the usual spacing), so a board that was
 * offline shows as a break, not a straight line across the hole.
 */
export function withGaps<T>(points: readonly { t: number; v: T }[], bucketMs: number): [number, T | null][] {
  const steps = points.slice(1).map((p, i) => p.t - points[i].t).sort((a, b) => a - b);
  const usual = steps.length ? steps[Math.floor(steps.length / 2)] : bucketMs;
  const gap = 2.5 * Math.max(bucketMs, usual);
  const out: [number, T | null][] = [];
  for (let i = 0; i < points.length; i++) {
    const p = points[i];
    if (i > 0 && p.t - points[i - 1].t > gap) out.push([points[i - 1].t + Math.max(bucketMs, usual), null]);
    out.push([p.t, p.v]);
  }
  return out;
}

/** Who moved a valve, after "opened by" / "closed by". */
export const sourceWords: Record<string, string> = {
  command: 'Runnel',
  button: 'the board’s button',
  failsafe: 'the board’s own timer',
  server: 'the server',
};
