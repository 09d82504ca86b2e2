import { boolean, index, integer, json, pgTable, primaryKey, text, timestamp, varchar } from 'drizzle-orm/pg-core';
import { roleEnum, unitSystemEnum } from './enums';
import { sites } from './sites';

export const users = pgTable('users', {
  id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
  email: varchar('email', { length: 254 }).notNull().unique(),
  name: varchar('name', { length: 120 }).notNull(),
  passwordHash: text('password_hash'),
  role: roleEnum('role').notNull(),
  unitSystem: unitSystemEnum('unit_system').notNull().default('metric'),
  disabled: boolean('disabled').notNull().default(false),
  failedSignIns: integer('failed_sign_ins').notNull().default(0),
  lockedUntil: timestamp('locked_until', { withTimezone: true }),
  createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
});

/** Which sites a technician or owner may see. Admins and managers see every site. */
export const siteMembers = pgTable(
  'site_members',
  {
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
    userId: integer('user_id')
      .notNull()
      .references(() => users.id, { onDelete: 'cascade' }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [primaryKey({ columns: [t.siteId, t.userId] }), index('site_members_user_idx').on(t.userId)],
);

/** Session store table, shaped as connect-pg-simple expects it. */
export const sessions = pgTable(
  'sessions',
  {
    sid: varchar('sid').primaryKey(),
    sess: json('sess').notNull(),
    expire: timestamp('expire', { precision: 6, withTimezone: false }).notNull(),
  },
  (t) => [index('sessions_expire_idx').on(t.expire)],
);

export type User = typeof users.$inferSelect;
export type NewUser = typeof users.$inferInsert;
