import { z } from 'zod';

export const plantTypes = ['cool_season_turf', 'warm_season_turf', 'shrubs', 'trees', 'groundcover', 'vegetables'] as const;
export const soilTextures = ['sand', 'loamy_sand', 'sandy_loam', 'loam', 'silt_loam', 'clay_loam', 'clay'] as const;
export const headTypes = ['spray', 'rotor', 'drip', 'bubbler'] as const;

export const zoneFields = {
  controllerId: z.number().int().positive(),
  relay: z.number().int().min(1, 'Relay numbers start at 1').max(8, 'A board has at most 8 relays'),
  name: z.string().trim().min(1, 'Name is required').max(120),
  plantType: z.enum(plantTypes),
  soilTexture: z.enum(soilTextures),
  headType: z.enum(headTypes),
  /** Another head type found on this valve (a spray or two on a rotor zone, say); null = none. */
  otherHeadType: z.enum(headTypes).nullable(),
  headCount: z.number().int().min(1, 'At least one head').max(500),
  flowPerHeadLpm: z.number().positive('Flow per head must be above 0').min(0.001, 'Flow per head at least 0.001 L/min').max(500),
  areaM2: z.number().positive('Area must be above 0').min(0.01, 'Area at least 0.01 m²').max(1_000_000),
  rootDepthM: z.number().min(0.05, 'Root depth at least 0.05 m').max(3),
  efficiency: z.number().min(0.3, 'Efficiency between 0.3 and 1').max(1, 'Efficiency between 0.3 and 1'),
  moistureThresholdPct: z.number().min(1).max(100).nullable(),
  notes: z.string().max(4000),
};

/** The other head type names a second type: it cannot be the zone's own. */
export function checkOtherHeadType(v: { headType?: string; otherHeadType?: string | null }, ctx: z.RefinementCtx) {
  if (v.otherHeadType != null && v.otherHeadType === v.headType) {
    ctx.addIssue({ code: 'custom', path: ['otherHeadType'], message: 'The other head type must differ from the head type' });
  }
}

export const createZoneSchema = z
  .strictObject({
    ...zoneFields,
    otherHeadType: zoneFields.otherHeadType.default(null),
    efficiency: zoneFields.efficiency.default(0.75),
    moistureThresholdPct: zoneFields.moistureThresholdPct.default(null),
    notes: zoneFields.notes.default(''),
  })
  .superRefine(checkOtherHeadType);
export type CreateZone = z.infer<typeof createZoneSchema>;

export const updateZoneSchema = z
  .strictObject(zoneFields)
  .partial()
  .refine((v) => Object.keys(v).length > 0, { message: 'Nothing to change' })
  .superRefine(checkOtherHeadType);
export type UpdateZone = z.infer<typeof updateZoneSchema>;

/**
 * Fields a technician may change on a service visit (head counts, measured flow, another head
 * type found on the valve, notes).
 */
export const technicianZoneFields = ['headCount', 'flowPerHeadLpm', 'otherHeadType', 'notes', 'name'] as const;
