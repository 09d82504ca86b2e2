import { z } from 'zod';

export const controllerFields = {
  name: z.string().trim().min(1, 'Name is required').max(120),
  siteId: z.number().int().positive(),
  serial: z
    .string()
    .trim()
    .regex(/^[A-Z0-9][A-Z0-9-]{3,31}$/, 'Serial: 4–32 capital letters, digits and dashes'),
  relayCount: z.number().int().min(4, 'A board has 4 to 8 relays').max(8, 'A board has 4 to 8 relays'),
  firmwareVersion: z.string().trim().min(1).max(32),
  staggerMs: z.number().int().min(100, 'Stagger at least 100 ms').max(10_000),
  maxConcurrentValves: z.number().int().min(1).max(8),
  masterValveRelay: z.number().int().min(1).max(8).nullable(),
  hasFlowSensor: z.boolean(),
};

export const createControllerSchema = z
  .strictObject({
    ...controllerFields,
    firmwareVersion: controllerFields.firmwareVersion.default('unknown'),
    staggerMs: controllerFields.staggerMs.default(500),
    maxConcurrentValves: controllerFields.maxConcurrentValves.default(1),
    masterValveRelay: controllerFields.masterValveRelay.default(null),
    hasFlowSensor: controllerFields.hasFlowSensor.default(false),
  })
  .refine((c) => c.masterValveRelay === null || c.masterValveRelay <= c.relayCount, {
    message: 'The master valve relay must exist on the board',
    path: ['masterValveRelay'],
  });
export type CreateController = z.infer<typeof createControllerSchema>;

export const updateControllerSchema = z
  .strictObject(controllerFields)
  .omit({ serial: true })
  .partial()
  .refine((v) => Object.keys(v).length > 0, { message: 'Nothing to change' });
export type UpdateController = z.infer<typeof updateControllerSchema>;
