import { sql } from 'drizzle-orm';
import type { Logger } from 'pino';
import type { Db } from '../db/client';
import { mailLog } from '../db/schema/index';
import type { Role } from '../contracts/common';
import type { Mailer, OutgoingMail } from './mailer';

/** What every mail job needs. */
export type MailCtx = {
  db: Db;
  mailer: Mailer;
  log: Logger;
  firmName: string;
  /** Where links in mail point (PUBLIC_URL, or the server's own URL). */
  baseUrl: string;
  timezone: string;
  throttleMs: number;
};

export type Recipient = { id: number; email: string; name: string; role: Role };

/** Users who may see a site now (admins and managers see every site), not disabled. */
export async function usersWhoSee(db: Db, siteId: number): Promise<Recipient[]> {
  const r = await db.execute<Recipient>(sql`
    select u.id, u.email, u.name, u.role::text as role from users u
    where not u.disabled and (u.role in ('admin', 'manager') or exists (select 1 from site_members m where m.user_id = u.id and m.site_id = ${siteId}))`);
  return r.rows;
}

/** Sites a person may see now: 'all' for admins and managers. */
export async function sitesOf(db: Db, user: Pick<Recipient, 'id' | 'role'>): Promise<'all' | Set<number>> {
  if (user.role === 'admin' || user.role === 'manager') return 'all';
  const r = await db.execute<{ site_id: number }>(sql`select site_id from site_members where user_id = ${user.id}`);
  return new Set(r.rows.map((x) => x.site_id));
}

/** Send and log one mail; errors are logged and recorded, never thrown to the caller's loop. */
export async function sendLogged(ctx: MailCtx, user: Recipient, category: 'alert' | 'digest' | 'weekly', key: string, m: OutgoingMail, at: Date): Promise<boolean> {
  try {
    const sent = await ctx.mailer.send(m);
    await ctx.db.insert(mailLog).values({ userId: user.id, toAddress: user.email, category, key, subject: m.subject.slice(0, 300), messageId: sent.messageId, sentAt: at }).onConflictDoNothing();
    return true;
  } catch (err) {
    // Left in the queue: the next pass tries again.
    ctx.log.warn({ err, to: user.email, category }, 'mail could not be sent');
    return false;
  }
}
