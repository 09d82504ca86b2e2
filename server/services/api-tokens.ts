import { createHash, randomBytes } from 'node:crypto';
import { and, desc, eq, inArray, isNull, sql } from 'drizzle-orm';
import { inTx, type Db } from '../db/client';
import { apiTokenSites, apiTokens, sites, users } from '../db/schema/index';
import { createTokenSchema, type ApiTokenView } from '../contracts/tokens';
import { parse } from '../middleware/validate';
import { AppError, forbidden, notFound } from '../errors';
import { seesAllSites, type Actor } from './actor';
import { recordAudit } from './audit';

type Ctx = { db: Db; actor: Actor };

/** Tokens look like `rnt_` + 43 URL-safe characters (32 random bytes). */
const TOKEN_PATTERN = /^rnt_[A-Za-z0-9_-]{43}$/;
const PREFIX_LENGTH = 12;

export const sha256 = (s: string) => createHash('sha256').update(s).digest('hex');

function requireAdmin(actor: Actor) {
  if (actor.role !== 'admin') throw forbidden('Only an admin may manage API tokens');
}

async function checkSites(db: Db, ids: number[]) {
  if (ids.length === 0) return;
  const found = await db.select({ id: sites.id }).from(sites).where(inArray(sites.id, ids));
  const missing = ids.filter((id) => !found.some((f) => f.id === id));
  if (missing.length) {
    throw new AppError(400, 'validation_failed', 'Some fields are not valid', [{ path: 'siteIds', message: `No such site: ${missing.join(', ')}` }]);
  }
}

export async function listTokens({ db, actor }: Ctx): Promise<ApiTokenView[]> {
  requireAdmin(actor);
  const rows = await db
    .select({ t: apiTokens, creator: { id: users.id, name: users.name } })
    .from(apiTokens)
    .leftJoin(users, eq(apiTokens.createdBy, users.id))
    .orderBy(desc(apiTokens.createdAt));
  const memberships = rows.length ? await db.select().from(apiTokenSites).where(inArray(apiTokenSites.tokenId, rows.map((r) => r.t.id))) : [];
  return rows.map(({ t, creator }) => ({
    id: t.id,
    name: t.name,
    role: t.role,
    siteIds: memberships.filter((m) => m.tokenId === t.id).map((m) => m.siteId).sort((a, b) => a - b),
    seesAllSites: seesAllSites(t.role),
    prefix: t.prefix,
    createdAt: t.createdAt.toISOString(),
    createdBy: creator?.id ? { id: creator.id, name: creator.name } : null,
    lastUsedAt: t.lastUsedAt?.toISOString() ?? null,
    revokedAt: t.revokedAt?.toISOString() ?? null,
  }));
}

/** Create a token; the token itself is in this answer only. */
export async function createToken(ctx: Ctx, raw: unknown): Promise<{ token: string; item: ApiTokenView }> {
  requireAdmin(ctx.actor);
  const input = parse(createTokenSchema, raw);
  const siteIds = seesAllSites(input.role) ? [] : [...new Set(input.siteIds)];
  await checkSites(ctx.db, siteIds);
  const token = `rnt_${randomBytes(32).toString('base64url')}`;
  const id = await inTx(ctx.db, async (tx) => {
    const [t] = await tx
      .insert(apiTokens)
      .values({ name: input.name, role: input.role, prefix: token.slice(0, PREFIX_LENGTH), tokenHash: sha256(token), createdBy: ctx.actor.userId || null })
      .returning();
    if (siteIds.length) await tx.insert(apiTokenSites).values(siteIds.map((siteId) => ({ tokenId: t.id, siteId })));
    await recordAudit(tx, ctx.actor, {
      action: 'api_token.create', entityType: 'api_token', entityId: t.id,
      after: { name: t.name, role: t.role, siteIds, prefix: t.prefix },
    });
    return t.id;
  });
  const item = (await listTokens(ctx)).find((t) => t.id === id)!;
  return { token, item };
}

export async function revokeToken(ctx: Ctx, id: number): Promise<void> {
  requireAdmin(ctx.actor);
  const [t] = await ctx.db.select().from(apiTokens).where(eq(apiTokens.id, id));
  if (!t) throw notFound('API token');
  if (t.revokedAt) return;
  await inTx(ctx.db, async (tx) => {
    await tx.update(apiTokens).set({ revokedAt: sql`now()` }).where(eq(apiTokens.id, id));
    await recordAudit(tx, ctx.actor, { action: 'api_token.revoke', entityType: 'api_token', entityId: id, before: { name: t.name, role: t.role, prefix: t.prefix } });
  });
}

export type TokenActor = Actor & { tokenId: number };

/**
 * The actor a bearer token stands for, or null when the token is unknown or revoked. A token
 * has no person behind it: userId is 0 and audit entries name the token.
 */
export async function actorForToken(db: Db, token: string, ip?: string): Promise<TokenActor | null> {
  if (!TOKEN_PATTERN.test(token)) return null;
  const [t] = await db.select().from(apiTokens).where(and(eq(apiTokens.tokenHash, sha256(token)), isNull(apiTokens.revokedAt)));
  if (!t) return null;
  let siteIds: Actor['siteIds'] = 'all';
  if (!seesAllSites(t.role)) {
    const rows = await db.select({ siteId: apiTokenSites.siteId }).from(apiTokenSites).where(eq(apiTokenSites.tokenId, t.id));
    siteIds = new Set(rows.map((r) => r.siteId));
  }
  // Last use to the minute is enough, and spares a write per request.
  await db
    .update(apiTokens)
    .set({ lastUsedAt: sql`now()` })
    .where(and(eq(apiTokens.id, t.id), sql`(${apiTokens.lastUsedAt} is null or ${apiTokens.lastUsedAt} < now() - interval '1 minute')`));
  return { userId: 0, email: `token:${t.prefix}`, name: `API token “${t.name}”`, role: t.role, siteIds, ip, tokenId: t.id };
}
