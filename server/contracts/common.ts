import { z } from 'zod';

export const idParam = z.object({ id: z.coerce.number().int().positive() });

export const roleSchema = z.enum(['admin', 'manager', 'technician', 'owner']);
export type Role = z.infer<typeof roleSchema>;

export const unitSystemSchema = z.enum(['metric', 'us']);
export type UnitSystem = z.infer<typeof unitSystemSchema>;

/** A problem with one field: `path` names it (dots between levels, "" for the whole body). */
export type ErrorDetail = { path: string; message: string; code?: string; [more: string]: unknown };

/**
 * The one error body every route returns. `details` is always there: null when there is
 * nothing to add, a list of `ErrorDetail` for field problems, or what a route documents
 * (CSV row errors, the hold that stopped a start).
 */
export type ErrorBody = {
  error: { code: string; message: string; details: unknown };
};

export type Warning = { code: string; message: string };
