import type { Db } from '../db/client';
import { auditLog } from '../db/schema/index';
import type { Actor } from './actor';

export type AuditEntry = {
  action: string;
  entityType: string;
  entityId?: string | number | null;
  siteId?: number | null;
  outcome?: string;
  before?: unknown;
  after?: unknown;
};

const SECRET_KEYS = /password|secret|token|hash/i;

/** Strip anything secret before it is written: the audit log is readable by people. */
function scrub(v: unknown): unknown {
  if (v === null || v === undefined || typeof v !== 'object') return v ?? null;
  if (Array.isArray(v)) return v.map(scrub);
  if (v instanceof Date) return v.toISOString();
  return Object.fromEntries(
    Object.entries(v as Record<string, unknown>)
      .filter(([k]) => !SECRET_KEYS.test(k))
      .map(([k, x]) => [k, scrub(x)]),
  );
}

export async function recordAudit(db: Db, actor: Actor | { label: string; ip?: string }, e: AuditEntry): Promise<void> {
  const isActor = 'userId' in actor;
  await db.insert(auditLog).values({
    actorUserId: isActor && actor.userId ? actor.userId : null,
    actorLabel: isActor ? actor.email : actor.label,
    ip: actor.ip ?? null,
    action: e.action,
    entityType: e.entityType,
    entityId: e.entityId == null ? null : String(e.entityId),
    siteId: e.siteId ?? null,
    outcome: e.outcome ?? 'ok',
    before: scrub(e.before) as object | null,
    after: scrub(e.after) as object | null,
  });
}
