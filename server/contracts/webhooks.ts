import { z } from 'zod';

/** Outgoing webhooks: which live events go where. */

export const webhookEvents = ['valve', 'alert', 'controller', 'rain'] as const;
export type WebhookEvent = (typeof webhookEvents)[number];

const url = z
  .string()
  .trim()
  .max(2000)
  .url('Enter a full address such as https://example.org/runnel')
  .refine((u) => /^https?:\/\//i.test(u), { message: 'The address must start with http:// or https://' })
  .refine((u) => !/^https?:\/\/[^/]*@/i.test(u), { message: 'Put credentials in the receiver, not in the address' });

const events = z
  .array(z.enum(webhookEvents))
  .min(1, 'Choose at least one kind of event')
  .refine((e) => new Set(e).size === e.length, { message: 'Each kind of event once' });

export const createWebhookSchema = z.strictObject({
  /** One site, or null for every site. */
  siteId: z.number().int().positive().nullable().default(null),
  url,
  events,
  description: z.string().trim().max(200).default(''),
  enabled: z.boolean().default(true),
});
export type CreateWebhook = z.infer<typeof createWebhookSchema>;

export const updateWebhookSchema = z
  .strictObject({
    siteId: z.number().int().positive().nullable(),
    url,
    events,
    description: z.string().trim().max(200),
    enabled: z.boolean(),
    /** true = replace the signing secret; the new one is in this answer only. */
    rotateSecret: z.literal(true),
  })
  .partial()
  .refine((v) => Object.keys(v).length > 0, { message: 'Nothing to change' });

export const deliveriesQuerySchema = z.object({ limit: z.coerce.number().int().min(1).max(500).default(50) });

export type WebhookView = {
  id: number;
  siteId: number | null;
  url: string;
  events: WebhookEvent[];
  description: string;
  enabled: boolean;
  createdAt: string;
  updatedAt: string;
};

export type WebhookDeliveryView = {
  id: number;
  deliveryKey: string;
  event: string;
  state: 'pending' | 'delivered' | 'failed';
  attempts: number;
  lastStatus: number | null;
  lastError: string | null;
  nextAttemptAt: string | null;
  createdAt: string;
  lastAttemptAt: string | null;
  deliveredAt: string | null;
  payload: unknown;
};
