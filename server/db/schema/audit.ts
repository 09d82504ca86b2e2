import { bigint, index, integer, jsonb, pgTable, timestamp, varchar } from 'drizzle-orm/pg-core';

/** Who did what, when, from where, and what changed (before and after). Append-only. */
export const auditLog = pgTable(
  'audit_log',
  {
    id: bigint('id', { mode: 'number' }).primaryKey().generatedAlwaysAsIdentity(),
    at: timestamp('at', { withTimezone: true }).notNull().defaultNow(),
    actorUserId: integer('actor_user_id'),
    actorLabel: varchar('actor_label', { length: 254 }).notNull(),
    ip: varchar('ip', { length: 64 }),
    action: varchar('action', { length: 64 }).notNull(),
    entityType: varchar('entity_type', { length: 32 }).notNull(),
    entityId: varchar('entity_id', { length: 64 }),
    siteId: integer('site_id'),
    outcome: varchar('outcome', { length: 32 }).notNull().default('ok'),
    before: jsonb('before'),
    after: jsonb('after'),
  },
  (t) => [index('audit_log_at_idx').on(t.at), index('audit_log_site_idx').on(t.siteId, t.at)],
);
