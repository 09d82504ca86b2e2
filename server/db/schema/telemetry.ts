import { sql } from 'drizzle-orm';
import { bigint, boolean, index, integer, pgEnum, pgTable, real, smallint, timestamp, uniqueIndex, uuid, varchar } from 'drizzle-orm/pg-core';
import { controllers, zones } from './devices';
import { users } from './users';

export const valveSourceEnum = pgEnum('valve_source', ['command', 'button', 'failsafe', 'server']);

/** Every valve state change a board reported (or the server concluded), in order. */
export const valveEvents = pgTable(
  'valve_events',
  {
    id: bigint('id', { mode: 'number' }).primaryKey().generatedAlwaysAsIdentity(),
    controllerId: integer('controller_id')
      .notNull()
      .references(() => controllers.id, { onDelete: 'cascade' }),
    /** Null when the relay drives the master valve or is not wired to a zone. */
    zoneId: integer('zone_id').references(() => zones.id, { onDelete: 'set null' }),
    relay: smallint('relay').notNull(),
    open: boolean('open').notNull(),
    source: valveSourceEnum('source').notNull(),
    commandId: uuid('command_id'),
    seq: bigint('seq', { mode: 'number' }),
    /** The board's own clock, as reported. */
    boardAt: timestamp('board_at', { withTimezone: true }),
    /** Server time: when it happened, corrected for a board clock known to be wrong. */
    at: timestamp('at', { withTimezone: true }).notNull(),
    receivedAt: timestamp('received_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [
    index('valve_events_zone_at_idx').on(t.zoneId, t.at),
    index('valve_events_controller_at_idx').on(t.controllerId, t.at),
    // A board's event resent after a reconnect, or delivered to a second instance, is stored once.
    uniqueIndex('valve_events_controller_seq_uq').on(t.controllerId, t.seq).where(sql`seq is not null`),
  ],
);

/**
 * Sensor samples. Written only in batches (COPY). Years of rows: a BRIN index on time keeps
 * the index tiny because rows arrive in time order; a btree on (controller, time) serves
 * per-controller ranges.
 */
export const readings = pgTable(
  'readings',
  {
    controllerId: integer('controller_id').notNull(),
    at: timestamp('at', { withTimezone: true }).notNull(),
    boardAt: timestamp('board_at', { withTimezone: true }).notNull(),
    receivedAt: timestamp('received_at', { withTimezone: true }).notNull(),
    seq: bigint('seq', { mode: 'number' }).notNull(),
    rain: boolean('rain').notNull(),
    moistureRaw: smallint('moisture_raw').notNull(),
    moisturePct: real('moisture_pct').notNull(),
    supplyV: real('supply_v').notNull(),
    flowLpm: real('flow_lpm'),
    rssi: smallint('rssi').notNull(),
  },
  (t) => [index('readings_at_brin').using('brin', t.at), index('readings_controller_at_idx').on(t.controllerId, t.at)],
);

export const commandStateEnum = pgEnum('command_state', ['queued', 'sent', 'acked', 'failed', 'cancelled']);

/** Commands sent to boards, with their outcome. */
export const commands = pgTable(
  'commands',
  {
    id: uuid('id').primaryKey(),
    controllerId: integer('controller_id')
      .notNull()
      .references(() => controllers.id, { onDelete: 'cascade' }),
    zoneId: integer('zone_id').references(() => zones.id, { onDelete: 'set null' }),
    op: varchar('op', { length: 16 }).notNull(),
    relay: smallint('relay'),
    maxOnSeconds: integer('max_on_seconds'),
    origin: varchar('origin', { length: 16 }).notNull(),
    requestedBy: integer('requested_by').references(() => users.id, { onDelete: 'set null' }),
    state: commandStateEnum('state').notNull().default('queued'),
    attempts: integer('attempts').notNull().default(0),
    error: varchar('error', { length: 300 }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    sentAt: timestamp('sent_at', { withTimezone: true }),
    ackedAt: timestamp('acked_at', { withTimezone: true }),
  },
  (t) => [index('commands_controller_idx').on(t.controllerId, t.createdAt)],
);

export type ValveEvent = typeof valveEvents.$inferSelect;
export type Reading = typeof readings.$inferSelect;
export type CommandRow = typeof commands.$inferSelect;
