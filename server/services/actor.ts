import { eq } from 'drizzle-orm';
import type { Db } from '../db/client';
import { siteMembers, users } from '../db/schema/index';
import type { Role } from '../contracts/common';

/** The signed-in person (or API token) a service acts for. */
export type Actor = {
  userId: number;
  email: string;
  name: string;
  role: Role;
  /** 'all' for admins and managers; otherwise the sites the person is a member of. */
  siteIds: 'all' | Set<number>;
  ip?: string;
};

export const seesAllSites = (role: Role) => role === 'admin' || role === 'manager';

export function canSeeSite(actor: Actor, siteId: number): boolean {
  return actor.siteIds === 'all' || actor.siteIds.has(siteId);
}

/** Load an actor for a user id; null when the user is missing or disabled. */
export async function loadActor(db: Db, userId: number, ip?: string): Promise<Actor | null> {
  const [u] = await db.select().from(users).where(eq(users.id, userId));
  if (!u || u.disabled) return null;
  let siteIds: Actor['siteIds'] = 'all';
  if (!seesAllSites(u.role)) {
    const rows = await db.select({ siteId: siteMembers.siteId }).from(siteMembers).where(eq(siteMembers.userId, u.id));
    siteIds = new Set(rows.map((r) => r.siteId));
  }
  return { userId: u.id, email: u.email, name: u.name, role: u.role, siteIds, ip };
}

export const systemActor: Actor = { userId: 0, email: 'system', name: 'Runnel', role: 'admin', siteIds: 'all' };
