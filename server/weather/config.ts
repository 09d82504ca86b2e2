import { z } from 'zod';

/**
 * Settings of the weather service client and of the local fake weather service. Read on
 * their own until they are folded into server/config.ts; values already parsed into the
 * app config take precedence over the environment.
 *
 * - WEATHER_URL: base URL of the weather service (default: the local fake on WEATHER_PORT).
 * - WEATHER_PORT: port of the local fake weather service (default 3902; 0 = any free port).
 * - WEATHER_TIMEOUT_MS: how long one request to the service may take (default 10 s).
 */
export const weatherConfigSchema = z
  .object({
    WEATHER_PORT: z.coerce.number().int().min(0).max(65535).default(3902),
    WEATHER_HOST: z.string().default('127.0.0.1'),
    WEATHER_URL: z.url({ protocol: /^https?$/, error: 'WEATHER_URL must be an http:// or https:// URL' }).optional(),
    WEATHER_TIMEOUT_MS: z.coerce.number().int().min(100).max(120_000).default(10_000),
  })
  .transform((c) => ({ ...c, WEATHER_URL: c.WEATHER_URL ?? `http://${c.WEATHER_HOST}:${c.WEATHER_PORT}` }));

export type WeatherConfig = z.infer<typeof weatherConfigSchema>;

/** Parse the weather settings from one or more sources (later sources win), dropping empty values. */
export function loadWeatherConfig(...sources: Record<string, unknown>[]): WeatherConfig {
  const merged: Record<string, unknown> = {};
  for (const src of sources) {
    for (const [k, v] of Object.entries(src)) if (k.startsWith('WEATHER_') && v !== undefined && v !== '') merged[k] = v;
  }
  const parsed = weatherConfigSchema.safeParse(merged);
  if (!parsed.success) {
    const lines = parsed.error.issues.map((i) => `  ${i.path.join('.') || '(env)'}: ${i.message}`);
    throw new Error(`Invalid weather settings:\n${lines.join('\n')}`);
  }
  return parsed.data;
}
