import { date, doublePrecision, index, integer, pgTable, primaryKey, real, timestamp } from 'drizzle-orm/pg-core';
import { sites } from './sites';
import { controllers, zones } from './devices';

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

/**
 * Readings per controller and UTC hour: count, sum, lowest and highest of each measurement, so a
 * year of one controller is 8,760 compact rows rather than a walk over every reading. Kept up to
 * date from the reading events (hours touched are recomputed from the readings table).
 */
export const readingsHourly = pgTable(
  'readings_hourly',
  {
    controllerId: integer('controller_id')
      .notNull()
      .references(() => controllers.id, { onDelete: 'cascade' }),
    hour: timestamp('hour', { withTimezone: true }).notNull(),
    n: integer('n').notNull(),
    moistureSum: doublePrecision('moisture_sum').notNull(),
    moistureMin: real('moisture_min').notNull(),
    moistureMax: real('moisture_max').notNull(),
    supplySum: doublePrecision('supply_sum').notNull(),
    supplyMin: real('supply_min').notNull(),
    supplyMax: real('supply_max').notNull(),
    /** Readings that carried a flow value. */
    flowN: integer('flow_n').notNull(),
    flowSum: doublePrecision('flow_sum'),
    flowMin: real('flow_min'),
    flowMax: real('flow_max'),
    updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [primaryKey({ name: 'readings_hourly_pk', columns: [t.controllerId, t.hour] })],
);
