import { sql, type SQL } from 'drizzle-orm';
import { DateTime } from 'luxon';
import type { Actor } from '../services/actor';

/** `col in (a, b, c)` with one bound parameter per value; `false` for an empty list. */
export function inList(col: SQL, values: readonly (number | string)[]): SQL {
  if (!values.length) return sql`false`;
  return sql`${col} in (${sql.join(values.map((v) => sql`${v}`), sql`, `)})`;
}

/** Limit a query to the sites the person may see (members only for technicians and owners). */
export function siteScope(col: SQL, actor: Actor): SQL | undefined {
  return actor.siteIds === 'all' ? undefined : inList(col, [...actor.siteIds]);
}

export const and = (parts: (SQL | undefined | null | false)[]): SQL => {
  const kept = parts.filter((p): p is SQL => !!p);
  return kept.length ? sql.join(kept, sql` and `) : sql`true`;
};

export const iso = (d: Date | string | null | undefined): string | null =>
  d === null || d === undefined ? null : (d instanceof Date ? d : new Date(d)).toISOString();

/** Milliseconds of a timestamp column from a raw query (drizzle hands those back as strings). */
export const ms = (v: unknown): number | null => (v === null || v === undefined ? null : new Date(v as string | Date).getTime());

export const num = (v: unknown): number => (v === null || v === undefined ? 0 : Number(v));
export const numOrNull = (v: unknown): number | null => (v === null || v === undefined ? null : Number(v));
export const round = (v: number, digits = 1) => {
  const f = 10 ** digits;
  return Math.round(v * f) / f;
};

/** Today's local date at a timezone. */
export const todayAt = (nowMs: number, tz: string) => DateTime.fromMillis(nowMs, { zone: tz }).toISODate()!;

/** [start, end) of a local calendar day as UTC instants. */
export function dayBounds(date: string, tz: string): { start: Date; end: Date } {
  const d = DateTime.fromISO(date, { zone: tz }).startOf('day');
  return { start: d.toJSDate(), end: d.plus({ days: 1 }).toJSDate() };
}

const DAY_MS = 86_400_000;
const utcMs = (date: string) => Date.UTC(Number(date.slice(0, 4)), Number(date.slice(5, 7)) - 1, Number(date.slice(8, 10)));
const isoOf = (ms: number) => new Date(ms).toISOString().slice(0, 10);

/** Calendar arithmetic on YYYY-MM-DD strings (no timezone involved). */
export function addDays(date: string, days: number): string {
  return isoOf(utcMs(date) + days * DAY_MS);
}

export function daysBetween(from: string, to: string): number {
  return Math.round((utcMs(to) - utcMs(from)) / DAY_MS);
}

/** Every date from..to inclusive. */
export function dateRange(from: string, to: string): string[] {
  const out: string[] = [];
  for (let t = utcMs(from), end = utcMs(to); t <= end; t += DAY_MS) out.push(isoOf(t));
  return out;
}
