import { z } from 'zod';

const minuteOfDay = z.number().int().min(0).max(1440);

export const restrictionsSchema = z
  .strictObject({
    dayRule: z.enum(['any', 'weekdays', 'odd', 'even']),
    weekdays: z.array(z.number().int().min(0).max(6)).max(7),
    noWateringWindows: z
      .array(
        z
          .strictObject({ startMinute: minuteOfDay, endMinute: minuteOfDay })
          .refine((w) => w.startMinute !== w.endMinute, { message: 'A no-watering window needs a length' }),
      )
      .max(6),
  })
  .refine((r) => r.dayRule !== 'weekdays' || r.weekdays.length > 0, {
    message: 'Choose at least one allowed weekday',
    path: ['weekdays'],
  });
export type Restrictions = z.infer<typeof restrictionsSchema>;

function isIanaZone(tz: string): boolean {
  try {
    new Intl.DateTimeFormat('en-US', { timeZone: tz });
    return tz.includes('/') || tz === 'UTC';
  } catch {
    return false;
  }
}

export const siteFields = {
  name: z.string().trim().min(1, 'Name is required').max(120),
  address: z.string().trim().max(300),
  timezone: z.string().refine(isIanaZone, { message: 'Use an IANA timezone such as Europe/Lisbon' }),
  latitude: z.number().min(-90).max(90),
  longitude: z.number().min(-180).max(180),
  elevationM: z.number().min(-450).max(6000),
  supplyFlowLpm: z.number().positive('Supply flow must be above 0').max(100_000),
  staticPressureKPa: z.number().positive().max(2_000),
  supplyMarginPct: z.number().min(0).max(90),
  /** Within a few km of a large body of water: kRs 0.19 instead of 0.16 in FAO-56 Eq. 50. */
  coastal: z.boolean(),
  restrictions: restrictionsSchema,
  allowParallel: z.boolean(),
  rainDelayHours: z.number().min(0, 'Hours cannot be negative').max(240),
  notes: z.string().max(4000),
};

export const createSiteSchema = z.strictObject({
  ...siteFields,
  address: siteFields.address.default(''),
  elevationM: siteFields.elevationM.default(0),
  supplyMarginPct: siteFields.supplyMarginPct.default(20),
  coastal: siteFields.coastal.default(false),
  restrictions: siteFields.restrictions.default({ dayRule: 'any', weekdays: [], noWateringWindows: [] }),
  allowParallel: siteFields.allowParallel.default(false),
  rainDelayHours: siteFields.rainDelayHours.default(24),
  notes: siteFields.notes.default(''),
});
export type CreateSite = z.infer<typeof createSiteSchema>;

export const updateSiteSchema = z
  .strictObject(siteFields)
  .partial()
  .refine((v) => Object.keys(v).length > 0, { message: 'Nothing to change' });
export type UpdateSite = z.infer<typeof updateSiteSchema>;
