import { boolean, doublePrecision, integer, jsonb, pgTable, text, timestamp, varchar } from 'drizzle-orm/pg-core';

/**
 * Watering restrictions set by the water authority: which days watering is allowed and the
 * hours of the day when it is not. Minutes are counted from local midnight in the site's timezone.
 */
export type WateringRestrictions = {
  dayRule: 'any' | 'weekdays' | 'odd' | 'even';
  /** 0 = Sunday … 6 = Saturday; used when dayRule is 'weekdays'. */
  weekdays: number[];
  noWateringWindows: { startMinute: number; endMinute: number }[];
};

export const sites = pgTable('sites', {
  id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
  name: varchar('name', { length: 120 }).notNull(),
  address: varchar('address', { length: 300 }).notNull().default(''),
  timezone: varchar('timezone', { length: 64 }).notNull(),
  latitude: doublePrecision('latitude').notNull(),
  longitude: doublePrecision('longitude').notNull(),
  elevationM: doublePrecision('elevation_m').notNull().default(0),
  supplyFlowLpm: doublePrecision('supply_flow_lpm').notNull(),
  staticPressureKPa: doublePrecision('static_pressure_kpa').notNull(),
  supplyMarginPct: doublePrecision('supply_margin_pct').notNull().default(20),
  /**
   * Within a few km of a large body of water (sea, large lake). Where a day's radiation is
   * estimated from its temperature range, FAO-56 Eq. 50 then uses kRs 0.19 instead of 0.16.
   */
  coastal: boolean('coastal').notNull().default(false),
  restrictions: jsonb('restrictions')
    .$type<WateringRestrictions>()
    .notNull()
    .default({ dayRule: 'any', weekdays: [], noWateringWindows: [] }),
  /** When false (the default) zones run one at a time; when true, as many as the supply and caps allow. */
  allowParallel: boolean('allow_parallel').notNull().default(false),
  /** After the rain input dries, scheduled runs stay held this many hours. */
  rainDelayHours: doublePrecision('rain_delay_hours').notNull().default(24),
  /** When the site's rain input last went dry (the rain hold runs from here). */
  rainClearedAt: timestamp('rain_cleared_at', { withTimezone: true }),
  notes: text('notes').notNull().default(''),
  createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
});

export type Site = typeof sites.$inferSelect;
export type NewSite = typeof sites.$inferInsert;
