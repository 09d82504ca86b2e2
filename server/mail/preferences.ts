import { eq, sql } from 'drizzle-orm';
import type { Db } from '../db/client';
import { mailPreferences } from '../db/schema/index';
import type { Role } from '../contracts/common';
import { alertKinds, mailPreferencesSchema, type AlertKind, type MailPreferences, type MailPreferencesView } from '../contracts/alerts';
import { parse } from '../middleware/validate';
import type { Actor } from '../services/actor';
import { recordAudit } from '../services/audit';

const problems: AlertKind[] = alertKinds.filter((k) => k !== 'rain_hold');

/** What a person gets until they choose: office roles each alert at once, technicians a daily digest, owners a weekly summary. */
export function defaultPreferences(role: Role): MailPreferences {
  switch (role) {
    case 'admin':
    case 'manager':
      return { alertKinds: [...problems], alertDelivery: 'immediate', weeklySummary: false };
    case 'technician':
      return { alertKinds: [...problems], alertDelivery: 'daily_digest', weeklySummary: false };
    case 'owner':
      return { alertKinds: ['controller_offline', 'valve_stuck_open', 'flow_while_closed'], alertDelivery: 'off', weeklySummary: true };
  }
}

/** Effective preferences from a stored row (or none). */
export function effective(role: Role, row: { alertKinds: string[]; alertDelivery: MailPreferences['alertDelivery']; weeklySummary: boolean } | null | undefined): MailPreferences & { isDefault: boolean } {
  if (!row) return { ...defaultPreferences(role), isDefault: true };
  return { alertKinds: row.alertKinds.filter((k): k is AlertKind => (alertKinds as readonly string[]).includes(k)), alertDelivery: row.alertDelivery, weeklySummary: row.weeklySummary, isDefault: false };
}

export async function getMailPreferences(db: Db, actor: Actor): Promise<MailPreferencesView> {
  const [row] = await db.select().from(mailPreferences).where(eq(mailPreferences.userId, actor.userId));
  return { ...effective(actor.role, row), email: actor.email };
}

export async function putMailPreferences(db: Db, actor: Actor, raw: unknown): Promise<MailPreferencesView> {
  const input = parse(mailPreferencesSchema, raw);
  const before = await getMailPreferences(db, actor);
  await db
    .insert(mailPreferences)
    .values({ userId: actor.userId, ...input })
    .onConflictDoUpdate({ target: mailPreferences.userId, set: { ...input, updatedAt: sql`now()` } });
  await recordAudit(db, actor, { action: 'mail_preferences.update', entityType: 'user', entityId: actor.userId, before, after: input });
  return { ...input, isDefault: false, email: actor.email };
}
