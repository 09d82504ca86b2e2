import {
  boolean,
  date,
  doublePrecision,
  index,
  integer,
  pgEnum,
  pgTable,
  primaryKey,
  text,
  timestamp,
} from 'drizzle-orm/pg-core';
import { sites } from './sites';
import { users } from './users';

/** How a day of weather reached Runnel: typed into the form, uploaded as CSV, or fetched from a weather service. */
export const weatherSourceEnum = pgEnum('weather_source', ['manual', 'csv', 'service']);
export const supplyTestKindEnum = pgEnum('supply_test_kind', ['bucket', 'meter']);

/**
 * Daily weather per site, one row per local calendar day of the site. ET₀ is computed on
 * write (FAO-56 Penman–Monteith with FAO-56's own fallbacks for missing data) and stored,
 * with the data path it took in `et0Method`.
 */
export const weatherDays = pgTable(
  'weather_days',
  {
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    date: date('date', { mode: 'string' }).notNull(),
    tmaxC: doublePrecision('tmax_c').notNull(),
    tminC: doublePrecision('tmin_c').notNull(),
    rhMaxPct: doublePrecision('rh_max_pct'),
    rhMinPct: doublePrecision('rh_min_pct'),
    windMs: doublePrecision('wind_ms'),
    windHeightM: doublePrecision('wind_height_m'),
    sunshineH: doublePrecision('sunshine_h'),
    solarMj: doublePrecision('solar_mj'),
    rainMm: doublePrecision('rain_mm').notNull().default(0),
    et0Mm: doublePrecision('et0_mm').notNull(),
    et0Method: text('et0_method').notNull(),
    source: weatherSourceEnum('source').notNull(),
    updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [primaryKey({ name: 'weather_days_site_date_pk', columns: [t.siteId, t.date] })],
);

/** A measurement of a site's water supply: a bucket test or two meter readings. */
export const supplyTests = pgTable(
  'supply_tests',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    kind: supplyTestKindEnum('kind').notNull(),
    volumeL: doublePrecision('volume_l'),
    seconds: doublePrecision('seconds'),
    meterStartL: doublePrecision('meter_start_l'),
    meterEndL: doublePrecision('meter_end_l'),
    minutes: doublePrecision('minutes'),
    flowLpm: doublePrecision('flow_lpm').notNull(),
    staticPressureKPa: doublePrecision('static_pressure_kpa'),
    note: text('note').notNull().default(''),
    /** True when this measurement was written to the site's supply flow. */
    applied: boolean('applied').notNull().default(false),
    recordedBy: integer('recorded_by').references(() => users.id, { onDelete: 'set null' }),
    recordedAt: timestamp('recorded_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [index('supply_tests_site_idx').on(t.siteId, t.recordedAt)],
);

export type WeatherDay = typeof weatherDays.$inferSelect;
export type NewWeatherDay = typeof weatherDays.$inferInsert;
export type SupplyTest = typeof supplyTests.$inferSelect;
export type NewSupplyTest = typeof supplyTests.$inferInsert;
