import { randomBytes } from 'node:crypto';
import { and, eq, isNull, sql } from 'drizzle-orm';
import type { Logger } from 'pino';
import { inTx, type Db } from '../db/client';
import { accountTokens, mailLog, users, type AccountToken, type User } from '../db/schema/index';
import { acceptInviteSchema, inviteSchema, passwordProblem, resetConfirmSchema, resetRequestSchema, type UserView } from '../contracts/users';
import { parse } from '../middleware/validate';
import { AppError, conflict, notFound } from '../errors';
import type { OutgoingMail } from '../mail/mailer';
import { renderMail } from '../mail/layout';
import { recordAudit } from './audit';
import { hashPassword } from './auth';
import { sha256 } from './api-tokens';
import { checkSiteIds, endSessions, requireAdmin, setMemberships, userView, type PeopleCtx } from './users';

/** How account mail leaves: the same mailer as alert mail, and where links point. */
export type AccountMail = {
  send(m: OutgoingMail & { to: string }): Promise<{ messageId: string | null }>;
  /** PUBLIC_URL, or the server's own URL — never the request's Host header (a forged Host would poison the link). */
  baseUrl: string;
  firmName: string;
  log: Logger;
};

export type TokenSettings = { inviteTtlHours: number; resetTtlMinutes: number };

type InviteCtx = PeopleCtx & { mail: AccountMail; settings: TokenSettings };

const newToken = () => randomBytes(32).toString('base64url');

const ROLE_WORDS: Record<User['role'], string> = {
  admin: 'an admin', manager: 'a manager', technician: 'a technician', owner: 'a property owner',
};

function when(d: Date) {
  return d.toISOString().replace('T', ' ').slice(0, 16) + ' UTC';
}

/** Send one account mail and note it in the mail log; false when it did not go (refused, or no mail server set). */
async function sendAccountMail(db: Db, mail: AccountMail, u: User, category: 'invite' | 'reset', tokenId: number, m: OutgoingMail): Promise<boolean> {
  try {
    const sent = await mail.send(m);
    // A transport that gives no message id has not confirmed anything went out.
    if (sent.messageId === null) return false;
    await db
      .insert(mailLog)
      .values({ userId: u.id, toAddress: u.email, category, key: `token:${tokenId}`, subject: m.subject.slice(0, 300), messageId: sent.messageId, sentAt: new Date() })
      .onConflictDoNothing();
    return true;
  } catch (err) {
    mail.log.warn({ err: { message: (err as Error)?.message }, category, userId: u.id }, 'account mail could not be sent');
    return false;
  }
}

function inviteMail(mail: AccountMail, u: User, inviter: string, token: string, expiresAt: Date, hours: number): OutgoingMail {
  const url = `${mail.baseUrl}/accept-invite?token=${encodeURIComponent(token)}`;
  const { text, html } = renderMail(mail.firmName, {
    intro: `${inviter} has invited you to ${mail.firmName === 'Runnel' ? 'Runnel' : `${mail.firmName}'s Runnel`} as ${ROLE_WORDS[u.role]}.`,
    sections: [
      {
        heading: 'To join',
        lines: [
          'Open the link below and choose a password of at least 10 characters.',
          `The link works once and expires ${when(expiresAt)} (${hours} hours after it was sent).`,
        ],
      },
    ],
    link: { label: 'Accept the invitation', url },
    footer: 'If you did not expect this invitation, ignore this message: nothing happens until the link is used.',
  });
  return { to: u.email, subject: `${mail.firmName}: you are invited to Runnel`, text, html };
}

function resetMail(mail: AccountMail, u: User, token: string, expiresAt: Date, minutes: number): OutgoingMail {
  const url = `${mail.baseUrl}/reset-password?token=${encodeURIComponent(token)}`;
  const { text, html } = renderMail(mail.firmName, {
    intro: `Someone asked to reset the Runnel password for ${u.email}.`,
    sections: [
      {
        heading: 'To choose a new password',
        lines: [`Open the link below. It works once and expires ${when(expiresAt)} (${minutes} minutes after it was sent).`, 'Every place you are signed in will be signed out.'],
      },
    ],
    link: { label: 'Choose a new password', url },
    footer: 'If you did not ask for this, ignore this message: your password stays as it is.',
  });
  return { to: u.email, subject: `${mail.firmName}: reset your Runnel password`, text, html };
}

async function issueToken(tx: Db, userId: number, purpose: 'invite' | 'reset', ttlMs: number, createdBy: number | null) {
  // One live link per person and purpose: a new one withdraws the older ones.
  await tx
    .update(accountTokens)
    .set({ revokedAt: sql`now()` })
    .where(and(eq(accountTokens.userId, userId), eq(accountTokens.purpose, purpose), isNull(accountTokens.usedAt), isNull(accountTokens.revokedAt)));
  const token = newToken();
  const expiresAt = new Date(Date.now() + ttlMs);
  const [row] = await tx.insert(accountTokens).values({ userId, purpose, tokenHash: sha256(token), expiresAt, createdBy }).returning();
  return { token, row };
}

export type InviteResult = { user: UserView; invitation: { expiresAt: string }; mailed: boolean };

/** POST /api/users/invitations — a new person without a password, and a link to set one. */
export async function invite(ctx: InviteCtx, raw: unknown): Promise<InviteResult> {
  requireAdmin(ctx.actor, 'invite people');
  const input = parse(inviteSchema, raw);
  const [dup] = await ctx.db.select({ id: users.id }).from(users).where(eq(users.email, input.email));
  if (dup) throw conflict('email_taken', 'Someone with this e-mail address is already in Runnel', [{ path: 'email', message: 'Already in use' }]);
  await checkSiteIds(ctx.db, input.siteIds);
  const ttlMs = ctx.settings.inviteTtlHours * 3_600_000;
  const { u, token, row } = await inTx(ctx.db, async (tx) => {
    const [u] = await tx.insert(users).values({ email: input.email, name: input.name, role: input.role, passwordHash: null }).returning();
    await setMemberships(tx, u.id, input.siteIds);
    const t = await issueToken(tx, u.id, 'invite', ttlMs, ctx.actor.userId || null);
    await recordAudit(tx, ctx.actor, { action: 'user.invite', entityType: 'user', entityId: u.id, after: await userView(tx, u.id) });
    return { u, ...t };
  }).catch((e) => {
    if ((e as { cause?: { code?: string } })?.cause?.code === '23505') throw conflict('email_taken', 'Someone with this e-mail address is already in Runnel');
    throw e;
  });
  const mailed = await sendAccountMail(ctx.db, ctx.mail, u, 'invite', row.id, inviteMail(ctx.mail, u, ctx.actor.name, token, row.expiresAt, ctx.settings.inviteTtlHours));
  return { user: await userView(ctx.db, u.id), invitation: { expiresAt: row.expiresAt.toISOString() }, mailed };
}

async function unactivated(db: Db, userId: number): Promise<User> {
  const [u] = await db.select().from(users).where(eq(users.id, userId));
  if (!u) throw notFound('User');
  if (u.passwordHash) throw conflict('already_active', `${u.name} has already accepted the invitation; disable the account instead`);
  return u;
}

/** POST /api/users/:id/invitation/resend — a new link (the old one stops working). */
export async function resendInvite(ctx: InviteCtx, userId: number): Promise<InviteResult> {
  requireAdmin(ctx.actor, 'invite people');
  const before = await unactivated(ctx.db, userId);
  const { token, row } = await inTx(ctx.db, async (tx) => {
    if (before.disabled) await tx.update(users).set({ disabled: false, updatedAt: sql`now()` }).where(eq(users.id, userId));
    const t = await issueToken(tx, userId, 'invite', ctx.settings.inviteTtlHours * 3_600_000, ctx.actor.userId || null);
    await recordAudit(tx, ctx.actor, { action: 'user.invite_resend', entityType: 'user', entityId: userId, after: { email: before.email, expiresAt: t.row.expiresAt } });
    return t;
  });
  const u = { ...before, disabled: false };
  const mailed = await sendAccountMail(ctx.db, ctx.mail, u, 'invite', row.id, inviteMail(ctx.mail, u, ctx.actor.name, token, row.expiresAt, ctx.settings.inviteTtlHours));
  return { user: await userView(ctx.db, userId), invitation: { expiresAt: row.expiresAt.toISOString() }, mailed };
}

/** DELETE /api/users/:id/invitation — the link stops working and the account stays disabled. */
export async function revokeInvite(ctx: PeopleCtx, userId: number): Promise<UserView> {
  requireAdmin(ctx.actor, 'invite people');
  const before = await unactivated(ctx.db, userId);
  await inTx(ctx.db, async (tx) => {
    await tx
      .update(accountTokens)
      .set({ revokedAt: sql`now()` })
      .where(and(eq(accountTokens.userId, userId), eq(accountTokens.purpose, 'invite'), isNull(accountTokens.usedAt), isNull(accountTokens.revokedAt)));
    await tx.update(users).set({ disabled: true, updatedAt: sql`now()` }).where(eq(users.id, userId));
    await recordAudit(tx, ctx.actor, { action: 'user.invite_revoke', entityType: 'user', entityId: userId, before: { email: before.email } });
  });
  return userView(ctx.db, userId);
}

const LINK_MESSAGES = {
  invite: {
    invalid: 'This invitation link is not valid. Check that the whole link was copied, or ask your administrator for a new one.',
    revoked: 'This invitation was withdrawn. Ask your administrator for a new one.',
    used: 'This invitation link has already been used. Sign in, or reset your password if you have forgotten it.',
    expired: 'This invitation link has expired. Ask your administrator to send a new one.',
  },
  reset: {
    invalid: 'This password-reset link is not valid. Check that the whole link was copied, or ask for a new one.',
    revoked: 'This password-reset link was replaced by a newer one. Use the latest message, or ask for a new link.',
    used: 'This password-reset link has already been used. Ask for a new one if you need to.',
    expired: 'This password-reset link has expired. Ask for a new one.',
  },
} as const;

/** Find a one-time link and say plainly why it cannot be used. */
async function usableToken(db: Db, purpose: 'invite' | 'reset', token: string): Promise<{ t: AccountToken; u: User }> {
  const msg = LINK_MESSAGES[purpose];
  const [row] = await db
    .select({ t: accountTokens, u: users })
    .from(accountTokens)
    .innerJoin(users, eq(accountTokens.userId, users.id))
    .where(and(eq(accountTokens.tokenHash, sha256(token)), eq(accountTokens.purpose, purpose)));
  if (!row) throw new AppError(400, `${purpose}_invalid`, msg.invalid);
  if (row.t.usedAt) throw new AppError(400, `${purpose}_used`, msg.used);
  if (row.t.revokedAt || row.u.disabled) throw new AppError(400, `${purpose}_revoked`, msg.revoked);
  if (row.t.expiresAt <= new Date()) throw new AppError(400, `${purpose}_expired`, msg.expired);
  return row;
}

function checkPassword(password: string, email: string) {
  const problem = passwordProblem(password, email);
  if (problem) throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'password', message: problem }]);
}

/** Mark the link used — once: a second, simultaneous use finds it taken. */
async function consume(tx: Db, t: AccountToken, purpose: 'invite' | 'reset') {
  const r = await tx.update(accountTokens).set({ usedAt: sql`now()` }).where(and(eq(accountTokens.id, t.id), isNull(accountTokens.usedAt))).returning({ id: accountTokens.id });
  if (r.length === 0) throw new AppError(400, `${purpose}_used`, LINK_MESSAGES[purpose].used);
}

/** POST /api/auth/accept-invite — set the first password. */
export async function acceptInvite(db: Db, raw: unknown, ip?: string): Promise<{ email: string }> {
  const { token, password } = parse(acceptInviteSchema, raw);
  const { t, u } = await usableToken(db, 'invite', token);
  if (u.passwordHash) throw new AppError(400, 'invite_used', LINK_MESSAGES.invite.used);
  checkPassword(password, u.email);
  const hash = await hashPassword(password);
  await inTx(db, async (tx) => {
    await consume(tx, t, 'invite');
    await tx.update(users).set({ passwordHash: hash, failedSignIns: 0, lockedUntil: null, updatedAt: sql`now()` }).where(eq(users.id, u.id));
    await recordAudit(tx, { label: u.email, ip }, { action: 'user.accept_invite', entityType: 'user', entityId: u.id });
  });
  return { email: u.email };
}

/**
 * POST /api/auth/password-reset — mail a link when the address belongs to an active account.
 * The caller answers 202 before this runs, whatever the outcome, so the answer never tells
 * whether an account exists.
 */
export async function requestReset(db: Db, mail: AccountMail, settings: TokenSettings, raw: unknown, ip?: string): Promise<void> {
  const { email } = parse(resetRequestSchema, raw);
  const [u] = await db.select().from(users).where(eq(users.email, email));
  if (!u || u.disabled || !u.passwordHash) {
    await recordAudit(db, { label: email, ip }, { action: 'auth.password_reset_request', entityType: 'user', outcome: 'no_account' });
    return;
  }
  const { token, row } = await inTx(db, async (tx) => {
    const t = await issueToken(tx, u.id, 'reset', settings.resetTtlMinutes * 60_000, null);
    await recordAudit(tx, { label: email, ip }, { action: 'auth.password_reset_request', entityType: 'user', entityId: u.id });
    return t;
  });
  await sendAccountMail(db, mail, u, 'reset', row.id, resetMail(mail, u, token, row.expiresAt, settings.resetTtlMinutes));
}

/** POST /api/auth/password-reset/confirm — a new password; every session of the person ends. */
export async function confirmReset(db: Db, raw: unknown, ip?: string): Promise<{ email: string; userId: number }> {
  const { token, password } = parse(resetConfirmSchema, raw);
  const { t, u } = await usableToken(db, 'reset', token);
  checkPassword(password, u.email);
  const hash = await hashPassword(password);
  await inTx(db, async (tx) => {
    await consume(tx, t, 'reset');
    await tx.update(users).set({ passwordHash: hash, failedSignIns: 0, lockedUntil: null, updatedAt: sql`now()` }).where(eq(users.id, u.id));
    await endSessions(tx, u.id);
    await recordAudit(tx, { label: u.email, ip }, { action: 'auth.password_reset', entityType: 'user', entityId: u.id });
  });
  return { email: u.email, userId: u.id };
}
