import { z } from 'zod';
import { roleSchema, unitSystemSchema } from './common';

export const signInSchema = z.strictObject({
  email: z.string().trim().toLowerCase().email('Enter a valid e-mail address').max(254),
  password: z.string().min(1, 'Enter your password').max(200),
});
export type SignIn = z.infer<typeof signInSchema>;

export const updateMeSchema = z.strictObject({
  unitSystem: unitSystemSchema.optional(),
  name: z.string().trim().min(1).max(120).optional(),
});

export type Me = {
  id: number;
  email: string;
  name: string;
  role: z.infer<typeof roleSchema>;
  unitSystem: z.infer<typeof unitSystemSchema>;
  siteIds: number[] | 'all';
  demo: boolean;
};
