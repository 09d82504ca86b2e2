import { sql } from 'drizzle-orm';
import { bigint, boolean, doublePrecision, index, integer, jsonb, pgEnum, pgTable, primaryKey, smallint, text, timestamp, uniqueIndex, uuid, varchar } from 'drizzle-orm/pg-core';
import { roleEnum } from './enums';
import { sites } from './sites';
import { zones } from './devices';
import { users } from './users';
import { serviceRecords } from './programs';

// Running the firm (issue 7): people's one-time links, site plans and photos, API tokens, webhooks.

export const accountTokenPurposeEnum = pgEnum('account_token_purpose', ['invite', 'reset']);

/**
 * A single-use link sent by e-mail: an invitation (set a first password) or a password reset.
 * Only the SHA-256 of the token is kept; the token itself exists only in the mail.
 */
export const accountTokens = pgTable(
  'account_tokens',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    userId: integer('user_id')
      .notNull()
      .references(() => users.id, { onDelete: 'cascade' }),
    purpose: accountTokenPurposeEnum('purpose').notNull(),
    tokenHash: varchar('token_hash', { length: 64 }).notNull().unique(),
    expiresAt: timestamp('expires_at', { withTimezone: true }).notNull(),
    usedAt: timestamp('used_at', { withTimezone: true }),
    revokedAt: timestamp('revoked_at', { withTimezone: true }),
    createdBy: integer('created_by').references(() => users.id, { onDelete: 'set null' }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [index('account_tokens_user_idx').on(t.userId, t.purpose)],
);

/** A site's plan image (one per site). The bytes live in UPLOAD_DIR under `storedName`. */
export const sitePlans = pgTable('site_plans', {
  siteId: integer('site_id')
    .primaryKey()
    .references(() => sites.id, { onDelete: 'cascade' }),
  storedName: varchar('stored_name', { length: 120 }).notNull(),
  contentType: varchar('content_type', { length: 32 }).notNull(),
  width: integer('width').notNull(),
  height: integer('height').notNull(),
  bytes: integer('bytes').notNull(),
  sha256: varchar('sha256', { length: 64 }).notNull(),
  uploadedBy: integer('uploaded_by').references(() => users.id, { onDelete: 'set null' }),
  uploadedAt: timestamp('uploaded_at', { withTimezone: true }).notNull().defaultNow(),
});

/** Where a zone sits on its site's plan, as fractions (0..1) of the image's width and height. */
export const zoneMarkers = pgTable('zone_markers', {
  zoneId: integer('zone_id')
    .primaryKey()
    .references(() => zones.id, { onDelete: 'cascade' }),
  siteId: integer('site_id')
    .notNull()
    .references(() => sites.id, { onDelete: 'cascade' }),
  x: doublePrecision('x').notNull(),
  y: doublePrecision('y').notNull(),
  updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
});

/** Photos attached to a service record, numbered 1..5 in upload order. */
export const serviceRecordPhotos = pgTable(
  'service_record_photos',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    serviceRecordId: integer('service_record_id')
      .notNull()
      .references(() => serviceRecords.id, { onDelete: 'cascade' }),
    n: smallint('n').notNull(),
    storedName: varchar('stored_name', { length: 120 }).notNull(),
    contentType: varchar('content_type', { length: 32 }).notNull(),
    width: integer('width').notNull(),
    height: integer('height').notNull(),
    bytes: integer('bytes').notNull(),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  },
  (t) => [uniqueIndex('service_record_photos_uq').on(t.serviceRecordId, t.n)],
);

/** A bearer token for scripts and home-automation hubs: a role and a set of sites, no person behind it. */
export const apiTokens = pgTable(
  'api_tokens',
  {
    id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
    name: varchar('name', { length: 120 }).notNull(),
    role: roleEnum('role').notNull(),
    /** The first characters of the token, shown in lists so people can tell tokens apart. */
    prefix: varchar('prefix', { length: 16 }).notNull(),
    tokenHash: varchar('token_hash', { length: 64 }).notNull().unique(),
    createdBy: integer('created_by').references(() => users.id, { onDelete: 'set null' }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    lastUsedAt: timestamp('last_used_at', { withTimezone: true }),
    revokedAt: timestamp('revoked_at', { withTimezone: true }),
  },
);

export const apiTokenSites = pgTable(
  'api_token_sites',
  {
    tokenId: integer('token_id')
      .notNull()
      .references(() => apiTokens.id, { onDelete: 'cascade' }),
    siteId: integer('site_id')
      .notNull()
      .references(() => sites.id, { onDelete: 'cascade' }),
  },
  (t) => [primaryKey({ columns: [t.tokenId, t.siteId] })],
);

/**
 * An outgoing webhook: events of the chosen kinds (for one site, or every site when siteId is
 * null) are POSTed to `url`, signed with HMAC-SHA256. The secret must be kept as it is to sign.
 */
export const webhooks = pgTable('webhooks', {
  id: integer('id').primaryKey().generatedAlwaysAsIdentity(),
  siteId: integer('site_id').references(() => sites.id, { onDelete: 'cascade' }),
  url: varchar('url', { length: 2000 }).notNull(),
  events: jsonb('events').$type<string[]>().notNull(),
  secret: varchar('secret', { length: 100 }).notNull(),
  enabled: boolean('enabled').notNull().default(true),
  description: varchar('description', { length: 200 }).notNull().default(''),
  createdBy: integer('created_by').references(() => users.id, { onDelete: 'set null' }),
  createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
  updatedAt: timestamp('updated_at', { withTimezone: true }).notNull().defaultNow(),
});

export const webhookDeliveryStateEnum = pgEnum('webhook_delivery_state', ['pending', 'delivered', 'failed']);

/** One event for one webhook: tried until the receiver answers 2xx or the tries run out. */
export const webhookDeliveries = pgTable(
  'webhook_deliveries',
  {
    id: bigint('id', { mode: 'number' }).primaryKey().generatedAlwaysAsIdentity(),
    webhookId: integer('webhook_id')
      .notNull()
      .references(() => webhooks.id, { onDelete: 'cascade' }),
    /** Sent as X-Runnel-Delivery; the same on every try, so a receiver can drop repeats. */
    deliveryKey: uuid('delivery_key').notNull().unique(),
    event: varchar('event', { length: 32 }).notNull(),
    payload: jsonb('payload').notNull(),
    state: webhookDeliveryStateEnum('state').notNull().default('pending'),
    attempts: integer('attempts').notNull().default(0),
    lastStatus: integer('last_status'),
    lastError: text('last_error'),
    nextAttemptAt: timestamp('next_attempt_at', { withTimezone: true }),
    createdAt: timestamp('created_at', { withTimezone: true }).notNull().defaultNow(),
    lastAttemptAt: timestamp('last_attempt_at', { withTimezone: true }),
    deliveredAt: timestamp('delivered_at', { withTimezone: true }),
  },
  (t) => [
    index('webhook_deliveries_hook_idx').on(t.webhookId, t.createdAt),
    index('webhook_deliveries_due_idx').on(t.nextAttemptAt).where(sql`state = 'pending'`),
  ],
);

export type AccountToken = typeof accountTokens.$inferSelect;
export type SitePlan = typeof sitePlans.$inferSelect;
export type ApiToken = typeof apiTokens.$inferSelect;
export type Webhook = typeof webhooks.$inferSelect;
export type WebhookDelivery = typeof webhookDeliveries.$inferSelect;
