import { z } from 'zod';

const common = {
  /** Static pressure read on a gauge with no water flowing, kPa (optional). */
  staticPressureKPa: z.number().positive('Pressure must be above 0').max(2000, 'Pressure at most 2000 kPa').optional(),
  note: z.string().trim().max(2000).default(''),
  /** Also write the measured flow (and pressure, when given) to the site's supply. */
  apply: z.boolean().default(false),
};

/** A bucket test: fill a container of known volume and time it. */
export const bucketTestSchema = z.strictObject({
  kind: z.literal('bucket'),
  volumeL: z.number().positive('Volume must be above 0').max(2000, 'Volume at most 2000 L'),
  seconds: z.number().positive('Seconds must be above 0').min(1, 'Time the fill for at least 1 second').max(3600, 'Time at most an hour'),
  ...common,
});

/** Two readings of the water meter, in litres, some minutes apart with only irrigation flowing. */
export const meterTestSchema = z
  .strictObject({
    kind: z.literal('meter'),
    meterStartL: z.number().min(0, 'Meter readings cannot be negative'),
    meterEndL: z.number().min(0, 'Meter readings cannot be negative'),
    minutes: z.number().positive('Minutes must be above 0').max(1440, 'At most a day'),
    ...common,
  })
  .refine((m) => m.meterEndL > m.meterStartL, { message: 'The end reading must be above the start reading', path: ['meterEndL'] });

export const supplyTestInputSchema = z.discriminatedUnion('kind', [bucketTestSchema, meterTestSchema]);
export type SupplyTestInput = z.infer<typeof supplyTestInputSchema>;

// ---------------------------------------------------------------------------------------
// Zone planning against the supply

/** Supply pipe for the planning figures: inside diameter (default 25 mm), length (default 30 m), Hazen–Williams C (default 150, PVC/PE). */
export const planningQuery = z.object({
  pipeMm: z.coerce.number().positive('Pipe diameter must be above 0').max(600, 'Pipe diameter at most 600 mm').default(25),
  pipeLengthM: z.coerce.number().min(0, 'Pipe length cannot be negative').max(10_000, 'Pipe length at most 10 km').default(30),
  c: z.coerce.number().min(60, 'Hazen–Williams C between 60 and 160').max(160, 'Hazen–Williams C between 60 and 160').default(150),
});
export type PlanningQuery = z.infer<typeof planningQuery>;

export const groupHeadsSchema = z.strictObject({
  supplyLpm: z.number().positive('Supply must be above 0').max(100_000),
  marginPct: z.number().min(0).max(90).default(0),
  heads: z
    .array(
      z.strictObject({
        id: z.union([z.string().trim().min(1).max(64), z.number().int()]).transform(String),
        flowLpm: z.number().positive('Head flow must be above 0').max(1000),
        headType: z.enum(['spray', 'rotor', 'drip', 'bubbler']),
      }),
    )
    .min(1, 'List at least one head')
    .max(2000, 'At most 2000 heads at once'),
});
export type GroupHeads = z.infer<typeof groupHeadsSchema>;
