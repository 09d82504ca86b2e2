import argon2 from 'argon2';
import { eq, sql } from 'drizzle-orm';
import type { Db } from '../db/client';
import { siteMembers, users } from '../db/schema/index';
import { AppError } from '../errors';
import { recordAudit } from './audit';
import type { Me } from '../contracts/auth';
import { seesAllSites } from './actor';

/** OWASP's recommended argon2id parameters (19 MiB, t=2, p=1). */
export const ARGON2_OPTIONS = { type: argon2.argon2id, memoryCost: 19_456, timeCost: 2, parallelism: 1 } as const;

export const hashPassword = (pw: string) => argon2.hash(pw, ARGON2_OPTIONS);

// Verified against when the e-mail is unknown, so both failures take the same time.
let dummyHash: Promise<string> | null = null;

const BAD_CREDENTIALS = 'The e-mail or password is not right';
const LOCK_AFTER = 5;
const LOCK_MINUTES = 5;

/** Check a sign-in; the message never says which part was wrong. */
export async function verifySignIn(db: Db, email: string, password: string, ip?: string) {
  const [u] = await db.select().from(users).where(eq(users.email, email));
  if (!u || !u.passwordHash || u.disabled) {
    dummyHash ??= hashPassword('not-a-real-password');
    await argon2.verify(await dummyHash, password).catch(() => false);
    await recordAudit(db, { label: email, ip }, { action: 'auth.sign_in', entityType: 'user', outcome: 'failed' });
    throw new AppError(401, 'bad_credentials', BAD_CREDENTIALS);
  }
  if (u.lockedUntil && u.lockedUntil > new Date()) {
    await recordAudit(db, { label: email, ip }, { action: 'auth.sign_in', entityType: 'user', entityId: u.id, outcome: 'locked' });
    throw new AppError(429, 'account_slowed', 'Too many failed sign-ins for this account. Wait a few minutes and try again.');
  }
  const ok = await argon2.verify(u.passwordHash, password).catch(() => false);
  if (!ok) {
    const failed = u.failedSignIns + 1;
    await db
      .update(users)
      .set({
        failedSignIns: failed,
        lockedUntil: failed >= LOCK_AFTER ? sql`now() + make_interval(mins => ${LOCK_MINUTES})` : null,
      })
      .where(eq(users.id, u.id));
    await recordAudit(db, { label: email, ip }, { action: 'auth.sign_in', entityType: 'user', entityId: u.id, outcome: 'failed' });
    throw new AppError(401, 'bad_credentials', BAD_CREDENTIALS);
  }
  await db.update(users).set({ failedSignIns: 0, lockedUntil: null }).where(eq(users.id, u.id));
  await recordAudit(db, { label: u.email, ip }, { action: 'auth.sign_in', entityType: 'user', entityId: u.id });
  return u;
}

export async function meOf(db: Db, userId: number, demo: boolean): Promise<Me> {
  const [u] = await db.select().from(users).where(eq(users.id, userId));
  if (!u) throw new AppError(401, 'unauthorized', 'Sign in to continue');
  let siteIds: Me['siteIds'] = 'all';
  if (!seesAllSites(u.role)) {
    const rows = await db.select({ siteId: siteMembers.siteId }).from(siteMembers).where(eq(siteMembers.userId, u.id));
    siteIds = rows.map((r) => r.siteId).sort((a, b) => a - b);
  }
  return { id: u.id, email: u.email, name: u.name, role: u.role, unitSystem: u.unitSystem, siteIds, demo };
}
