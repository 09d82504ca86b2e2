import { sql } from 'drizzle-orm';
import { bigint, boolean, index, integer, jsonb, pgEnum, pgTable, text, timestamp, uniqueIndex, varchar } from 'drizzle-orm/pg-core';
import { sites } from './sites';
import { controllers, zones } from './devices';
import { users } from './users';

export const alertSeverityEnum = pgEnum('alert_severity', ['critical', 'warning', 'info']);
export const alertStateEnum = pgEnum('alert_state', ['open', 'acknowledged', 'resolved']);
export const mailDeliveryEnum = pgEnum('mail_delivery', ['immediate', 'daily_digest', 'off']);

/**
 * Something wrong (or worth knowing) that the server concluded from what the boards report.
 * One row per episode: `episodeKey` names the condition (kind + what it is about), and at most
 * one row per key is not resolved at a time, so a condition is raised once until it ends.
 */
export const alerts = pgTable(
  'alerts',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    controllerId: integer('controller_id').references(() => controllers.id, { onDelete: 'set null' }),
    zoneId: integer('zone_id').references(() => zones.id, { onDelete: 'set null' }),
    /** See server/contracts/alerts.ts for the kinds. */
    kind: varchar('kind', { length: 32 }).notNull(),
    severity: alertSeverityEnum('severity').notNull(),
    state: alertStateEnum('state').notNull().default('open'),
    episodeKey: varchar('episode_key', { length: 120 }).notNull(),
    title: varchar('title', { length: 200 }).notNull(),
    message: text('message').notNull(),
    details: jsonb('details').$type<Record<string, unknown>>().notNull().default({}),
    openedAt: timestamp('opened_at', { withTimezone: true }).notNull(),
    /** Last time the condition was seen to hold. */
    lastSeenAt: timestamp('last_seen_at', { withTimezone: true }).notNull(),
    acknowledgedAt: timestamp('acknowledged_at', { withTimezone: true }),
    acknowledgedBy: integer('acknowledged_by').references(() => users.id, { onDelete: 'set null' }),
    resolvedAt: timestamp('resolved_at', { withTimezone: true }),
    resolution: text('resolution'),
  },
  (t) => [
    uniqueIndex('alerts_live_episode_uq').on(t.episodeKey).where(sql`state <> 'resolved'`),
    index('alerts_site_opened_idx').on(t.siteId, t.openedAt),
    index('alerts_state_opened_idx').on(t.state, t.openedAt),
  ],
);

/** What alert mail a person wants. No row = the defaults for their role (server/mail/preferences.ts). */
export const mailPreferences = pgTable('mail_preferences', {
  userId: integer('user_id')
    .primaryKey()
    .references(() => users.id, { onDelete: 'cascade' }),
  alertKinds: jsonb('alert_kinds').$type<string[]>().notNull(),
  alertDelivery: mailDeliveryEnum('alert_delivery').notNull(),
  weeklySummary: boolean('weekly_summary').notNull(),
  updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
});

/** An alert waiting to be mailed to one person (at once, throttled, or in the daily digest). */
export const mailQueue = pgTable(
  'mail_queue',
  {
    id: bigint('id', { mode: 'number' }).primaryKey().generatedAlwaysAsIdentity(),
    userId: integer('user_id')
      .notNull()
      .references(() => users.id, { onDelete: 'cascade' }),
    alertId: integer('alert_id')
      .notNull()
      .references(() => alerts.id, { onDelete: 'cascade' }),
    kind: varchar('kind', { length: 32 }).notNull(),
    digest: boolean('digest').notNull(),
    queuedAt: timestamp('queued_at', { withTimezone: true }).notNull(),
    sentAt: timestamp('sent_at', { withTimezone: true }),
    /** Set when the item was dropped instead of sent (the person no longer sees the site, or opted out). */
    droppedAt: timestamp('dropped_at', { withTimezone: true }),
  },
  (t) => [index('mail_queue_pending_idx').on(t.userId, t.kind).where(sql`sent_at is null and dropped_at is null`)],
);

/**
 * Every mail sent. Also the memory for throttling (category 'alert', key = alert kind) and for
 * sending a digest or weekly summary once (key = the day or the week; unique per person).
 */
export const mailLog = pgTable(
  'mail_log',
  {
    id: bigint('id', { mode: 'number' }).primaryKey().generatedAlwaysAsIdentity(),
    userId: integer('user_id').references(() => users.id, { onDelete: 'set null' }),
    toAddress: varchar('to_address', { length: 254 }).notNull(),
    category: varchar('category', { length: 16 }).notNull(),
    key: varchar('key', { length: 64 }).notNull(),
    subject: varchar('subject', { length: 300 }).notNull(),
    messageId: varchar('message_id', { length: 300 }),
    error: text('error'),
    sentAt: timestamp('sent_at', { withTimezone: true }).notNull(),
  },
  (t) => [
    index('mail_log_user_idx').on(t.userId, t.category, t.key, t.sentAt),
    uniqueIndex('mail_log_once_uq').on(t.userId, t.category, t.key).where(sql`category <> 'alert'`),
  ],
);

export type AlertRow = typeof alerts.$inferSelect;
export type MailPreferencesRow = typeof mailPreferences.$inferSelect;
