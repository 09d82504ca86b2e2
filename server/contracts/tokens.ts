import { z } from 'zod';
import { roleSchema } from './common';
import { controllerFields } from './controllers';

/** Credentials Runnel hands out: API tokens for scripts, and controller serials and secrets. */

// --- API tokens ---

export const createTokenSchema = z
  .strictObject({
    name: z.string().trim().min(1, 'Name the token (what uses it)').max(120),
    role: roleSchema,
    /** Sites the token may see; ignored for admin and manager tokens, which see every site. */
    siteIds: z.array(z.number().int().positive()).max(1000).default([]),
  })
  .refine((t) => t.role === 'admin' || t.role === 'manager' || t.siteIds.length > 0, {
    message: 'A technician or owner token needs at least one site',
    path: ['siteIds'],
  });
export type CreateToken = z.infer<typeof createTokenSchema>;

export type ApiTokenView = {
  id: number;
  name: string;
  role: z.infer<typeof roleSchema>;
  siteIds: number[];
  seesAllSites: boolean;
  /** The token's first characters, to tell tokens apart. */
  prefix: string;
  createdAt: string;
  createdBy: { id: number; name: string } | null;
  lastUsedAt: string | null;
  revokedAt: string | null;
};

// --- controller provisioning ---

export const provisionControllerSchema = z
  .strictObject({
    name: controllerFields.name,
    relayCount: controllerFields.relayCount,
    staggerMs: controllerFields.staggerMs.default(500),
    maxConcurrentValves: controllerFields.maxConcurrentValves.default(1),
    masterValveRelay: controllerFields.masterValveRelay.default(null),
    hasFlowSensor: controllerFields.hasFlowSensor.default(false),
  })
  .refine((c) => c.masterValveRelay === null || c.masterValveRelay <= c.relayCount, {
    message: 'The master valve relay must exist on the board',
    path: ['masterValveRelay'],
  });
export type ProvisionController = z.infer<typeof provisionControllerSchema>;

/** POST /api/controllers/:id/setup-sheet: the secret just shown, so the sheet can print it (checked against the stored hash). */
export const setupSheetSchema = z.strictObject({ secret: z.string().trim().min(16).max(200) });

export const moveControllerSchema = z.strictObject({ siteId: z.number().int().positive() });

export const relayMapSchema = z.strictObject({
  map: z
    .array(z.strictObject({ relay: z.number().int().min(1).max(8), zoneId: z.number().int().positive().nullable() }))
    .min(1, 'List at least one relay')
    .max(8),
});
export type RelayMap = z.infer<typeof relayMapSchema>;

export type RelayUse = 'zone' | 'master_valve' | 'free';
export type RelayView = {
  relay: number;
  use: RelayUse;
  zone: { id: number; name: string } | null;
  /** What the board last reported (null when the server has no live state for it). */
  open: boolean | null;
};
