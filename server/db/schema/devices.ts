import { bigint, boolean, doublePrecision, index, integer, pgTable, text, timestamp, unique, varchar } from 'drizzle-orm/pg-core';
import { headTypeEnum, plantTypeEnum, soilTextureEnum } from './enums';
import { sites } from './sites';

export const controllers = pgTable(
  'controllers',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    serial: varchar('serial', { length: 32 }).notNull().unique(),
    name: varchar('name', { length: 120 }).notNull(),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'restrict' }),
    relayCount: integer('relay_count').notNull(),
    firmwareVersion: varchar('firmware_version', { length: 32 }).notNull().default('unknown'),
    staggerMs: integer('stagger_ms').notNull().default(500),
    maxConcurrentValves: integer('max_concurrent_valves').notNull().default(1),
    masterValveRelay: integer('master_valve_relay'),
    hasFlowSensor: boolean('has_flow_sensor').notNull().default(false),
    /** argon2id hash of the board's MQTT secret; the secret itself is never stored. */
    secretHash: text('secret_hash'),
    online: boolean('online').notNull().default(false),
    /** Highest board sequence number stored; anything at or below it is a duplicate. */
    lastSeq: bigint('last_seq', { mode: 'number' }).notNull().default(0),
    seqGaps: integer('seq_gaps').notNull().default(0),
    /** Server time minus board time, measured when the board comes online (0 when within 2 min). */
    clockOffsetMs: integer('clock_offset_ms').notNull().default(0),
    rainTripped: boolean('rain_tripped').notNull().default(false),
    lastSeenAt: timestamp('last_seen_at', { withTimezone: true }),
    retiredAt: timestamp('retired_at', { withTimezone: true }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [index('controllers_site_idx').on(t.siteId)],
);

export const zones = pgTable(
  'zones',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    controllerId: integer('controller_id')
      .notNull()
      .references(() => controllers.id, { onDelete: 'cascade' }),
    relay: integer('relay').notNull(),
    name: varchar('name', { length: 120 }).notNull(),
    plantType: plantTypeEnum('plant_type').notNull(),
    soilTexture: soilTextureEnum('soil_texture').notNull(),
    headType: headTypeEnum('head_type').notNull(),
    /** A second head type found on this valve (say a spray or two on a rotor zone); null = none. */
    otherHeadType: headTypeEnum('other_head_type'),
    headCount: integer('head_count').notNull(),
    flowPerHeadLpm: doublePrecision('flow_per_head_lpm').notNull(),
    areaM2: doublePrecision('area_m2').notNull(),
    rootDepthM: doublePrecision('root_depth_m').notNull(),
    efficiency: doublePrecision('efficiency').notNull().default(0.75),
    /** Soil moisture (%) above which this zone's scheduled runs are held; null = not used. */
    moistureThresholdPct: doublePrecision('moisture_threshold_pct'),
    notes: text('notes').notNull().default(''),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [unique('zones_controller_relay_uq').on(t.controllerId, t.relay), index('zones_controller_idx').on(t.controllerId)],
);

export type Controller = typeof controllers.$inferSelect;
export type NewController = typeof controllers.$inferInsert;
export type Zone = typeof zones.$inferSelect;
export type NewZone = typeof zones.$inferInsert;
