import { z } from 'zod';

export const idParam = z.object({ id: z.coerce.number().int().positive() });

export const roleSchema = z.enum(['admin', 'manager', 'technician', 'owner']);
export type Role = z.infer<typeof roleSchema>;

export const unitSystemSchema = z.enum(['metric', 'us']);
export type UnitSystem = z.infer<typeof unitSystemSchema>;

/** The one error body every route returns. */
export type ErrorBody = {
  error: { code: string; message: string; details?: unknown };
};

export type Warning = { code: string; message: string };
