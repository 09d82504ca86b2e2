import { z } from 'zod';

const hhmm = z.string().regex(/^([01]\d|2[0-3]):[0-5]\d$/, 'Use a 24-hour time such as 05:30');
const isoDate = z.string().regex(/^\d{4}-\d{2}-\d{2}$/, 'Use a date such as 2026-06-01');

export const dayRuleSchema = z.discriminatedUnion('kind', [
  z.strictObject({ kind: z.literal('weekdays'), weekdays: z.array(z.number().int().min(0).max(6)).min(1, 'Choose at least one day').max(7) }),
  z.strictObject({ kind: z.literal('interval'), everyDays: z.number().int().min(1).max(30), anchorDate: isoDate }),
  z.strictObject({ kind: z.literal('odd') }),
  z.strictObject({ kind: z.literal('even') }),
]);

export const programZoneSchema = z
  .strictObject({
    zoneId: z.number().int().positive(),
    minutes: z.number().positive('Minutes must be above 0').max(240, 'At most 240 minutes'),
    cycleSoak: z.enum(['off', 'auto', 'manual']).default('auto'),
    cycleMinutes: z.number().positive().max(240).nullable().default(null),
    soakMinutes: z.number().min(0).max(240).nullable().default(null),
  })
  .refine((z) => z.cycleSoak !== 'manual' || (z.cycleMinutes !== null && z.soakMinutes !== null), {
    message: 'Set cycle and soak minutes, or let Runnel work them out',
    path: ['cycleMinutes'],
  });

const programFields = {
  name: z.string().trim().min(1, 'Name is required').max(120),
  enabled: z.boolean(),
  startTimes: z.array(hhmm).min(1, 'At least one start time').max(8),
  dayRule: dayRuleSchema,
  activeFrom: isoDate.nullable(),
  activeTo: isoDate.nullable(),
  mode: z.enum(['fixed', 'seasonal', 'weather']),
  seasonalPct: z.number().int().min(0).max(300),
  zones: z.array(programZoneSchema).min(1, 'Add at least one zone').max(64),
};

const dateOrder = (p: { activeFrom?: string | null; activeTo?: string | null }) => !p.activeFrom || !p.activeTo || p.activeFrom <= p.activeTo;
const noDupZones = (p: { zones?: { zoneId: number }[] }) => !p.zones || new Set(p.zones.map((z) => z.zoneId)).size === p.zones.length;

export const createProgramSchema = z
  .strictObject({
    ...programFields,
    enabled: programFields.enabled.default(true),
    activeFrom: programFields.activeFrom.default(null),
    activeTo: programFields.activeTo.default(null),
    mode: programFields.mode.default('fixed'),
    seasonalPct: programFields.seasonalPct.default(100),
  })
  .refine(dateOrder, { message: 'The active range ends before it starts', path: ['activeTo'] })
  .refine(noDupZones, { message: 'A zone appears twice', path: ['zones'] });
export type CreateProgram = z.infer<typeof createProgramSchema>;

export const updateProgramSchema = z
  .strictObject(programFields)
  .partial()
  .refine((v) => Object.keys(v).length > 0, { message: 'Nothing to change' })
  .refine(dateOrder, { message: 'The active range ends before it starts', path: ['activeTo'] })
  .refine(noDupZones, { message: 'A zone appears twice', path: ['zones'] });
export type UpdateProgram = z.infer<typeof updateProgramSchema>;

export const rainDelaySchema = z
  .strictObject({
    hours: z.number().positive().max(24 * 30).optional(),
    until: z.iso.datetime({ offset: true }).optional(),
    reason: z.string().max(300).default(''),
  })
  .refine((d) => (d.hours === undefined) !== (d.until === undefined), { message: 'Give either hours or an end time', path: ['hours'] });

export const walkSchema = z.strictObject({
  zoneIds: z.array(z.number().int().positive()).min(1, 'Choose at least one zone').max(64),
  minutes: z.number().int().min(1).max(30),
  /** Technicians may test a valve during a rain hold, explicitly. */
  overrideHold: z.boolean().default(false),
});

export const walkStepSchema = z.strictObject({
  action: z.enum(['next', 'back', 'extend', 'stop']),
  minutes: z.number().int().min(1).max(30).optional(),
  note: z.string().max(1000).optional(),
});
