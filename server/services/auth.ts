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
const SLOWED = 'Too many failed sign-ins for this account. Wait a few minutes and try again.';
/** This many failed sign-ins for one e-mail … */
const SLOW_AFTER = 5;
/** … within this many minutes (and since its last good sign-in or new password) … */
const SLOW_WINDOW_MINUTES = 15;
/** … slow that e-mail down until this many minutes after the last of them. */
const SLOW_MINUTES = 5;

/** An e-mail as the sign-in schema reads it (trimmed, lower-cased); what slowing and rate limits key on. */
export const normaliseEmail = (raw: unknown): string => (typeof raw === 'string' ? raw.trim().toLowerCase() : '');

/**
 * Recent failed sign-ins for an e-mail, counted from the audit log rather than the user row, so
 * an address with no account is slowed exactly like one with an account (the answer must not
 * tell them apart), and every server instance counts the same. A good sign-in, an accepted
 * invitation or a password reset starts the count again. Only the last few minutes are read
 * (the audit log's time index).
 */
async function recentFailures(db: Db, email: string): Promise<{ failed: number; slowed: boolean }> {
  const r = await db.execute<{ failed: number; slowed: boolean }>(sql`
    with recent as (
      select at, action, outcome from audit_log
      where at > now() - make_interval(mins => ${SLOW_WINDOW_MINUTES}) and actor_label = ${email}
        and action in ('auth.sign_in', 'auth.password_reset', 'user.accept_invite')
    ), restart as (
      select coalesce(max(at), '-infinity'::timestamptz) as at from recent where action <> 'auth.sign_in' or outcome = 'ok'
    ), failures as (
      select count(*)::int as n, max(recent.at) as last from recent, restart
      where recent.action = 'auth.sign_in' and recent.outcome = 'failed' and recent.at > restart.at
    )
    select n as failed, (n >= ${SLOW_AFTER} and last + make_interval(mins => ${SLOW_MINUTES}) > now()) as slowed from failures`);
  return r.rows[0];
}

/**
 * Check a sign-in; the message never says which part was wrong, and an unknown e-mail goes
 * through the same steps as a known one: the same answers, the same slowing, the same work.
 */
export async function verifySignIn(db: Db, rawEmail: string, password: string, ip?: string) {
  const email = normaliseEmail(rawEmail);
  const [u] = await db.select().from(users).where(eq(users.email, email));
  const { failed, slowed } = await recentFailures(db, email);
  if (slowed) {
    await recordAudit(db, { label: email, ip }, { action: 'auth.sign_in', entityType: 'user', entityId: u?.id, outcome: 'locked' });
    throw new AppError(429, 'account_slowed', SLOWED);
  }
  const usable = !!u && !!u.passwordHash && !u.disabled;
  dummyHash ??= hashPassword('not-a-real-password');
  const ok = await argon2.verify(usable ? u.passwordHash! : await dummyHash, password).catch(() => false);
  if (!ok || !usable) {
    // The user row mirrors the count for the people page; for an unknown e-mail it updates nothing.
    const now = failed + 1;
    await db
      .update(users)
      .set({ failedSignIns: now, lockedUntil: now >= SLOW_AFTER ? sql`now() + make_interval(mins => ${SLOW_MINUTES})` : null })
      .where(eq(users.email, email));
    await recordAudit(db, { label: email, ip }, { action: 'auth.sign_in', entityType: 'user', entityId: u?.id, outcome: 'failed' });
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
