import { date, doublePrecision, index, integer, pgTable, primaryKey, timestamp } from 'drizzle-orm/pg-core';
import { sites } from './sites';
import { zones } from './devices';

/**
 * Water put down per zone per local calendar day of the site (the day a zone run was planned
 * to start), kept up to date as zone runs end. Litres are measured where the controller's flow
 * sensor gave a reading for the run, estimated (nominal flow × minutes) otherwise; both parts
 * are kept so every figure can say which it is.
 */
export const waterUseDaily = pgTable(
  'water_use_daily',
  {
    zoneId: integer('zone_id')
      .notNull()
      .references(() => zones.id, { onDelete: 'cascade' }),
    date: date('date', { mode: 'string' }).notNull(),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    /** Zone runs (cycles) that put water down. */
    runs: integer('runs').notNull().default(0),
    minutes: doublePrecision('minutes').notNull().default(0),
    /** measuredLitres + estimatedLitres. */
    litres: doublePrecision('litres').notNull().default(0),
    /** Litres of runs the flow sensor measured. */
    measuredLitres: doublePrecision('measured_litres').notNull().default(0),
    /** Litres of runs without a measurement, from nominal flow × minutes. */
    estimatedLitres: doublePrecision('estimated_litres').notNull().default(0),
    measuredRuns: integer('measured_runs').notNull().default(0),
    /** Zone runs held, skipped, failed or stopped that day. */
    notAsPlanned: integer('not_as_planned').notNull().default(0),
    updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [
    primaryKey({ name: 'water_use_daily_pk', columns: [t.zoneId, t.date] }),
    index('water_use_daily_site_date_idx').on(t.siteId, t.date),
  ],
);

export type WaterUseDay = typeof waterUseDaily.$inferSelect;
