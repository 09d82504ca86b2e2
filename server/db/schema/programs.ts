import { boolean, date, doublePrecision, index, integer, jsonb, pgEnum, pgTable, smallint, text, timestamp, unique, uuid, varchar } from 'drizzle-orm/pg-core';
import { sites } from './sites';
import { controllers, zones } from './devices';
import { users } from './users';

export const runModeEnum = pgEnum('run_mode', ['fixed', 'seasonal', 'weather']);
export const cycleSoakEnum = pgEnum('cycle_soak', ['off', 'auto', 'manual']);

/** A watering program: zones in order with minutes, start times and day rules, in the site's timezone. */
export const programs = pgTable(
  'programs',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    name: varchar('name', { length: 120 }).notNull(),
    enabled: boolean('enabled').notNull().default(true),
    /** Local start times "HH:MM". */
    startTimes: jsonb('start_times').$type<string[]>().notNull(),
    /** { kind: 'weekdays', weekdays } | { kind: 'interval', everyDays, anchorDate } | { kind: 'odd' } | { kind: 'even' } */
    dayRule: jsonb('day_rule').$type<import('../../scheduler/calendar').DayRule>().notNull(),
    /** The cron expressions evaluated (one per start time), kept for reading and for audits. */
    crons: jsonb('crons').$type<string[]>().notNull(),
    activeFrom: date('active_from'),
    activeTo: date('active_to'),
    mode: runModeEnum('mode').notNull().default('fixed'),
    seasonalPct: integer('seasonal_pct').notNull().default(100),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [index('programs_site_idx').on(t.siteId)],
);

export const programZones = pgTable(
  'program_zones',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    programId: integer('program_id')
      .notNull()
      .references(() => programs.id, { onDelete: 'cascade' }),
    zoneId: integer('zone_id')
      .notNull()
      .references(() => zones.id, { onDelete: 'cascade' }),
    position: integer('position').notNull(),
    minutes: doublePrecision('minutes').notNull(),
    cycleSoak: cycleSoakEnum('cycle_soak').notNull().default('auto'),
    cycleMinutes: doublePrecision('cycle_minutes'),
    soakMinutes: doublePrecision('soak_minutes'),
  },
  (t) => [unique('program_zones_uq').on(t.programId, t.zoneId)],
);

export const runStateEnum = pgEnum('run_state', ['planned', 'running', 'completed', 'partial', 'held_rain', 'skipped_restriction', 'failed', 'cancelled']);
export const zoneRunStateEnum = pgEnum('zone_run_state', [
  'planned', 'running', 'completed', 'stopped', 'held_rain', 'skipped_restriction', 'skipped_not_needed', 'failed',
]);

/** One occurrence of a program (or a manual/walk run). Unique per program and start: a slot is dispatched once. */
export const runs = pgTable(
  'runs',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    programId: integer('program_id').references(() => programs.id, { onDelete: 'set null' }),
    kind: varchar('kind', { length: 16 }).notNull().default('program'),
    scheduledFor: timestamp('scheduled_for', { withTimezone: true }).notNull(),
    state: runStateEnum('state').notNull().default('planned'),
    reason: text('reason'),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    endedAt: timestamp('ended_at', { withTimezone: true }),
  },
  (t) => [unique('runs_program_slot_uq').on(t.programId, t.scheduledFor), index('runs_site_time_idx').on(t.siteId, t.scheduledFor)],
);

export const zoneRuns = pgTable(
  'zone_runs',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    runId: integer('run_id')
      .notNull()
      .references(() => runs.id, { onDelete: 'cascade' }),
    siteId: integer('site_id').notNull(),
    zoneId: integer('zone_id')
      .notNull()
      .references(() => zones.id, { onDelete: 'cascade' }),
    controllerId: integer('controller_id').notNull(),
    position: integer('position').notNull(),
    cycle: smallint('cycle').notNull().default(0),
    plannedStart: timestamp('planned_start', { withTimezone: true }).notNull(),
    plannedEnd: timestamp('planned_end', { withTimezone: true }).notNull(),
    plannedMinutes: doublePrecision('planned_minutes').notNull(),
    actualStart: timestamp('actual_start', { withTimezone: true }),
    actualEnd: timestamp('actual_end', { withTimezone: true }),
    actualMinutes: doublePrecision('actual_minutes'),
    estimatedLitres: doublePrecision('estimated_litres'),
    measuredLitres: doublePrecision('measured_litres'),
    commandId: uuid('command_id'),
    state: zoneRunStateEnum('state').notNull().default('planned'),
    reason: text('reason'),
  },
  (t) => [
    unique('zone_runs_uq').on(t.runId, t.zoneId, t.cycle),
    index('zone_runs_zone_time_idx').on(t.zoneId, t.plannedStart),
    index('zone_runs_site_time_idx').on(t.siteId, t.plannedStart),
  ],
);

/** A manual rain delay for a site: no scheduled watering until `until`. */
export const rainDelays = pgTable(
  'rain_delays',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    startsAt: timestamp('starts_at', { withTimezone: true }).notNull(),
    until: timestamp('until', { withTimezone: true }).notNull(),
    reason: varchar('reason', { length: 300 }).notNull().default(''),
    createdBy: integer('created_by').references(() => users.id, { onDelete: 'set null' }),
    cancelledAt: timestamp('cancelled_at', { withTimezone: true }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [index('rain_delays_site_idx').on(t.siteId, t.until)],
);

/** A technician's record of a visit: a walk test's results, or a note on a zone or controller. */
export const serviceRecords = pgTable(
  'service_records',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    zoneId: integer('zone_id').references(() => zones.id, { onDelete: 'set null' }),
    controllerId: integer('controller_id').references(() => controllers.id, { onDelete: 'set null' }),
    kind: varchar('kind', { length: 16 }).notNull(),
    authorId: integer('author_id').references(() => users.id, { onDelete: 'set null' }),
    summary: text('summary').notNull().default(''),
    details: jsonb('details'),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [index('service_records_site_idx').on(t.siteId, t.createdAt), index('service_records_zone_idx').on(t.zoneId, t.createdAt)],
);

export type Program = typeof programs.$inferSelect;
export type ProgramZone = typeof programZones.$inferSelect;
export type Run = typeof runs.$inferSelect;
export type ZoneRun = typeof zoneRuns.$inferSelect;
