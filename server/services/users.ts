import { and, asc, count, desc, eq, gte, inArray, isNull, like, lt, ne, sql, type SQL } from 'drizzle-orm';
import { inTx, type Db } from '../db/client';
import { accountTokens, auditLog, siteMembers, sites, users, type User } from '../db/schema/index';
import { auditQuerySchema, updateUserSchema, type AuditEntryView, type UserStatus, type UserView } from '../contracts/users';
import { parse } from '../middleware/validate';
import { AppError, conflict, forbidden, notFound } from '../errors';
import { seesAllSites, type Actor } from './actor';
import { recordAudit } from './audit';

/** What a change to a person tells the rest of the server (the live hub closes or refreshes their sockets). */
export type PeopleEvents = { userDisabled(userId: number): void; userChanged(userId: number): void; userSignedOut(userId: number): void };

export type PeopleCtx = { db: Db; actor: Actor; events?: PeopleEvents };

export function requireAdmin(actor: Actor, what = 'manage people') {
  if (actor.role !== 'admin') throw forbidden(`Only an admin may ${what}`);
}

type PendingInvite = { userId: number; expiresAt: Date; createdAt: Date };

function statusOf(u: User, invite: PendingInvite | undefined, now: Date): UserStatus {
  if (u.disabled) return 'disabled';
  if (u.passwordHash) return 'active';
  return invite && invite.expiresAt > now ? 'invited' : 'invite_expired';
}

async function viewsOf(db: Db, rows: User[]): Promise<UserView[]> {
  if (rows.length === 0) return [];
  const ids = rows.map((u) => u.id);
  const members = await db.select().from(siteMembers).where(inArray(siteMembers.userId, ids));
  const invites = await db
    .select({ userId: accountTokens.userId, expiresAt: accountTokens.expiresAt, createdAt: accountTokens.createdAt })
    .from(accountTokens)
    .where(and(inArray(accountTokens.userId, ids), eq(accountTokens.purpose, 'invite'), isNull(accountTokens.usedAt), isNull(accountTokens.revokedAt)))
    .orderBy(asc(accountTokens.createdAt));
  const latest = new Map<number, PendingInvite>();
  for (const i of invites) latest.set(i.userId, i);
  const now = new Date();
  return rows.map((u) => {
    const invite = u.passwordHash ? undefined : latest.get(u.id);
    return {
      id: u.id,
      email: u.email,
      name: u.name,
      role: u.role,
      status: statusOf(u, invite, now),
      disabled: u.disabled,
      siteIds: members.filter((m) => m.userId === u.id).map((m) => m.siteId).sort((a, b) => a - b),
      seesAllSites: seesAllSites(u.role),
      invitation: invite && !u.disabled ? { expiresAt: invite.expiresAt.toISOString(), sentAt: invite.createdAt.toISOString() } : null,
      lockedUntil: u.lockedUntil && u.lockedUntil > now ? u.lockedUntil.toISOString() : null,
      createdAt: u.createdAt.toISOString(),
    };
  });
}

export async function listUsers({ db, actor }: PeopleCtx): Promise<UserView[]> {
  requireAdmin(actor);
  return viewsOf(db, await db.select().from(users).orderBy(asc(users.name), asc(users.id)));
}

export async function userView(db: Db, id: number): Promise<UserView> {
  const [u] = await db.select().from(users).where(eq(users.id, id));
  if (!u) throw notFound('User');
  return (await viewsOf(db, [u]))[0];
}

export async function checkSiteIds(db: Db, ids: number[]) {
  if (ids.length === 0) return;
  const found = await db.select({ id: sites.id }).from(sites).where(inArray(sites.id, ids));
  const missing = ids.filter((id) => !found.some((f) => f.id === id));
  if (missing.length) {
    throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'siteIds', message: `No such site: ${missing.join(', ')}` }]);
  }
}

/** Replace a person's site memberships. */
export async function setMemberships(tx: Db, userId: number, siteIds: number[]) {
  await tx.delete(siteMembers).where(eq(siteMembers.userId, userId));
  const unique = [...new Set(siteIds)];
  if (unique.length) await tx.insert(siteMembers).values(unique.map((siteId) => ({ siteId, userId })));
}

/** End every session of a person at once (they are signed out everywhere). */
export async function endSessions(db: Db, userId: number): Promise<number> {
  const r = await db.execute(sql`delete from sessions where (sess->>'userId') = ${String(userId)}`);
  return r.rowCount ?? 0;
}

/** Admins who can still sign in (enabled); the last one may not be removed, disabled or demoted. */
async function otherActiveAdmins(db: Db, exceptId: number): Promise<number> {
  const [{ n }] = await db
    .select({ n: sql<number>`count(*)::int` })
    .from(users)
    .where(and(eq(users.role, 'admin'), eq(users.disabled, false), ne(users.id, exceptId)));
  return n;
}

/** PATCH /api/users/:id — role, name, sites, disabled. */
export async function updateUser(ctx: PeopleCtx, id: number, raw: unknown): Promise<UserView> {
  requireAdmin(ctx.actor);
  const input = parse(updateUserSchema, raw);
  const [before] = await ctx.db.select().from(users).where(eq(users.id, id));
  if (!before) throw notFound('User');
  const losesAdmin = before.role === 'admin' && !before.disabled && ((input.role !== undefined && input.role !== 'admin') || input.disabled === true);
  if (losesAdmin && (await otherActiveAdmins(ctx.db, id)) === 0) {
    throw conflict('last_admin', 'This is the last admin: make someone else an admin first');
  }
  if (input.siteIds) await checkSiteIds(ctx.db, input.siteIds);
  const beforeView = await userView(ctx.db, id);
  const disabling = input.disabled === true && !before.disabled;
  await inTx(ctx.db, async (tx) => {
    const { siteIds, ...cols } = input;
    if (Object.keys(cols).length) await tx.update(users).set({ ...cols, updatedAt: sql`now()` }).where(eq(users.id, id));
    if (siteIds) await setMemberships(tx, id, siteIds);
    if (disabling) await endSessions(tx, id);
    const after = await userView(tx, id);
    await recordAudit(tx, ctx.actor, {
      action: disabling ? 'user.disable' : input.disabled === false && before.disabled ? 'user.enable' : 'user.update',
      entityType: 'user', entityId: id, before: beforeView, after,
    });
  });
  if (disabling) ctx.events?.userDisabled(id);
  else ctx.events?.userChanged(id);
  return userView(ctx.db, id);
}

// --- the audit log, as people may read it ---

/** A date alone means the whole day (UTC): from its start, to its end. */
const bound = (v: string, end: boolean) => (v.length === 10 ? new Date(`${v}T00:00:00Z`).getTime() + (end ? 86_400_000 : 0) : Date.parse(v));

/**
 * Who may read what: admins and managers everything; technicians the entries of their sites;
 * owners only valve entries (action valve.*) of their own sites.
 */
function scope(actor: Actor): SQL | undefined | null {
  if (actor.role === 'admin' || actor.role === 'manager') return undefined;
  const ids = actor.siteIds === 'all' ? null : [...actor.siteIds];
  if (ids && ids.length === 0) return null;
  const sites = ids ? inArray(auditLog.siteId, ids) : undefined;
  return actor.role === 'owner' ? and(sites, like(auditLog.action, 'valve.%')) : sites;
}

/** GET /api/audit */
export async function queryAudit(db: Db, actor: Actor, raw: unknown) {
  const q = parse(auditQuerySchema, raw);
  const empty = { items: [] as AuditEntryView[], page: q.page, pageSize: q.pageSize, total: 0 };
  const visible = scope(actor);
  if (visible === null) return empty;
  const conds: (SQL | undefined)[] = [visible];
  if (q.siteId) conds.push(eq(auditLog.siteId, q.siteId));
  if (q.userId) conds.push(eq(auditLog.actorUserId, q.userId));
  if (q.action) conds.push(q.action.endsWith('.*') ? like(auditLog.action, `${q.action.slice(0, -1)}%`) : eq(auditLog.action, q.action));
  if (q.entityType) conds.push(eq(auditLog.entityType, q.entityType));
  if (q.from) conds.push(gte(auditLog.at, new Date(bound(q.from, false))));
  if (q.to) conds.push(lt(auditLog.at, new Date(bound(q.to, true) + (q.to.length === 10 ? 0 : 1))));
  const where = and(...conds);
  const [{ total }] = await db.select({ total: count() }).from(auditLog).where(where);
  const rows = await db
    .select()
    .from(auditLog)
    .where(where)
    .orderBy(desc(auditLog.at), desc(auditLog.id))
    .limit(q.pageSize)
    .offset((q.page - 1) * q.pageSize);
  const items: AuditEntryView[] = rows.map((r) => ({
    id: r.id, at: r.at.toISOString(), actor: { userId: r.actorUserId, label: r.actorLabel }, ip: r.ip, action: r.action,
    entityType: r.entityType, entityId: r.entityId, siteId: r.siteId, outcome: r.outcome, before: r.before, after: r.after,
  }));
  return { items, page: q.page, pageSize: q.pageSize, total };
}
