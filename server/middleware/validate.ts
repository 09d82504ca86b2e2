import type { z } from 'zod';
import { validationError } from '../errors';

/** Parse with a zod schema or throw the one 400 shape with field-level details. */
export function parse<S extends z.ZodType>(schema: S, value: unknown): z.infer<S> {
  const r = schema.safeParse(value);
  if (!r.success) throw validationError(r.error);
  return r.data;
}
