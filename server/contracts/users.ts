import { z } from 'zod';
import { roleSchema } from './common';

/** People, their one-time links, and the audit log query (admin screens). */

export const PASSWORD_MIN = 10;
export const PASSWORD_MAX = 200;

export const emailSchema = z.string().trim().toLowerCase().email('Enter a valid e-mail address').max(254);

export const passwordSchema = z
  .string()
  .min(PASSWORD_MIN, `Use at least ${PASSWORD_MIN} characters`)
  .max(PASSWORD_MAX, `Use at most ${PASSWORD_MAX} characters`);

/** Passwords people pick first; refused whatever their length. Compared in lower case. */
export const COMMON_PASSWORDS = [
  '1234567890', '12345678910', '0123456789', '0987654321', '1111111111', '123123123123', '1q2w3e4r5t', '1qaz2wsx3edc',
  'qwertyuiop', 'qwerty12345', 'qwerty123456', 'asdfghjkl1', 'zxcvbnm123', 'abcdefghij', 'abc1234567', 'aaaaaaaaaa',
  'password12', 'password123', 'password1234', 'passw0rd123', 'p@ssw0rd123', 'iloveyou12', 'letmein123', 'welcome123',
  'welcome2024', 'welcome2025', 'changeme123', 'administrator', 'admin12345', 'sprinkler123', 'irrigation', 'irrigation1',
  'football123', 'baseball123', 'sunshine123', 'princess123', 'dragon1234', 'monkey12345', 'trustno1234', 'runnel12345',
] as const;

/**
 * Rules beyond length: not a well-known password, not built on the person's e-mail, not one
 * character over and over. Returns a message to show, or null when the password is fine.
 */
export function passwordProblem(password: string, email: string): string | null {
  if (password.length < PASSWORD_MIN) return `Use at least ${PASSWORD_MIN} characters`;
  if (password.length > PASSWORD_MAX) return `Use at most ${PASSWORD_MAX} characters`;
  const lower = password.toLowerCase();
  if ((COMMON_PASSWORDS as readonly string[]).includes(lower)) return 'This password is on the list of commonly used ones; choose another';
  if (new Set(lower).size <= 2) return 'Use more than one or two different characters';
  const local = email.split('@')[0]?.toLowerCase() ?? '';
  if (local.length >= 3 && lower.includes(local)) return 'The password must not contain your e-mail name';
  if (lower === email.toLowerCase()) return 'The password must not be your e-mail address';
  return null;
}

const siteIdList = z.array(z.number().int().positive()).max(1000);

export const inviteSchema = z.strictObject({
  email: emailSchema,
  name: z.string().trim().min(1, 'Name is required').max(120),
  role: roleSchema,
  /** Sites a technician or owner sees; admins and managers see every site. */
  siteIds: siteIdList.default([]),
});
export type Invite = z.infer<typeof inviteSchema>;

export const updateUserSchema = z
  .strictObject({
    name: z.string().trim().min(1, 'Name is required').max(120),
    role: roleSchema,
    disabled: z.boolean(),
    siteIds: siteIdList,
  })
  .partial()
  .refine((v) => Object.keys(v).length > 0, { message: 'Nothing to change' });
export type UpdateUser = z.infer<typeof updateUserSchema>;

const oneTimeToken = z.string().trim().min(20, 'This link is not complete').max(200, 'This link is not valid');

export const acceptInviteSchema = z.strictObject({ token: oneTimeToken, password: passwordSchema });
export const resetRequestSchema = z.strictObject({ email: emailSchema });
export const resetConfirmSchema = z.strictObject({ token: oneTimeToken, password: passwordSchema });

export type UserStatus = 'active' | 'invited' | 'invite_expired' | 'disabled';

export type UserView = {
  id: number;
  email: string;
  name: string;
  role: z.infer<typeof roleSchema>;
  status: UserStatus;
  disabled: boolean;
  /** Site memberships (what a technician or owner sees). */
  siteIds: number[];
  seesAllSites: boolean;
  /** Set while an invitation is pending (not yet accepted, not revoked). */
  invitation: { expiresAt: string; sentAt: string } | null;
  lockedUntil: string | null;
  createdAt: string;
};

// --- audit log ---

const isoDateTime = z.iso.datetime({ offset: true, message: 'Use an ISO date-time such as 2025-05-01T00:00:00Z' });
const isoDateOrTime = z.union([isoDateTime, z.iso.date({ message: 'Use a date (YYYY-MM-DD) or an ISO date-time' })]);

export const auditQuerySchema = z.object({
  siteId: z.coerce.number().int().positive().optional(),
  userId: z.coerce.number().int().positive().optional(),
  /** Exact action ("zone.update"), or a family with a trailing ".*" ("valve.*"). */
  action: z.string().trim().regex(/^[a-z_]+(\.[a-z_]+)?(\.\*)?$/, 'Actions look like zone.update or valve.*').max(64).optional(),
  entityType: z.string().trim().regex(/^[a-z_]+$/).max(32).optional(),
  from: isoDateOrTime.optional(),
  to: isoDateOrTime.optional(),
  page: z.coerce.number().int().min(1).default(1),
  pageSize: z.coerce.number().int().min(1).max(200).default(50),
});
export type AuditQuery = z.infer<typeof auditQuerySchema>;

export type AuditEntryView = {
  id: number;
  at: string;
  actor: { userId: number | null; label: string };
  ip: string | null;
  action: string;
  entityType: string;
  entityId: string | null;
  siteId: number | null;
  outcome: string;
  before: unknown;
  after: unknown;
};
