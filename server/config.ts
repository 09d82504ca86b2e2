import { z } from 'zod';

const bool = z
  .enum(['0', '1', 'true', 'false', 'yes', 'no'])
  .transform((v) => v === '1' || v === 'true' || v === 'yes');

const configSchema = z
  .object({
    NODE_ENV: z.enum(['development', 'test', 'production']).default('development'),
    HOST: z.string().default('127.0.0.1'),
    PORT: z.coerce.number().int().min(0).max(65535).default(3000),
    DATABASE_URL: z
      .string({ error: 'DATABASE_URL is required (npm start sets it when it runs PostgreSQL itself)' })
      .regex(/^postgres(ql)?:\/\//, 'DATABASE_URL must be a postgres:// URL'),
    SESSION_SECRET: z.string().min(32, 'SESSION_SECRET must be at least 32 characters').optional(),
    RUNNEL_DEMO: bool.default(false),
    TRUST_PROXY: bool.default(false),
    LOG_LEVEL: z.enum(['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent']).optional(),
    JSON_LIMIT: z.string().default('100kb'),
    LOGIN_RATE_LIMIT: z.coerce.number().int().positive().default(10),
    MANUAL_MAX_MINUTES: z.coerce.number().int().min(1).max(720).default(60),
    MQTT_PORT: z.coerce.number().int().min(0).max(65535).default(1883),
    MQTT_HOST: z.string().default('127.0.0.1'),
    MQTT_URL: z.string().url().optional(),
    SIM_PORT: z.coerce.number().int().min(0).max(65535).default(3901),
    /** Run the simulated demo fleet inside the server process (demo mode only). */
    SIMULATOR: bool.default(true),
    ACK_TIMEOUT_MS: z.coerce.number().int().min(100).max(60_000).default(3000),
    COMMAND_RETRIES: z.coerce.number().int().min(0).max(10).default(2),
    /** Added to a run's length to give the board's own failsafe timer. */
    FAILSAFE_MARGIN_SECONDS: z.coerce.number().int().min(1).max(600).default(30),
    OFFLINE_AFTER_SECONDS: z.coerce.number().int().min(5).max(3600).default(90),
    READING_BATCH_ROWS: z.coerce.number().int().min(1).max(100_000).default(5000),
    READING_FLUSH_MS: z.coerce.number().int().min(5).max(10_000).default(200),
    READING_BUFFER_ROWS: z.coerce.number().int().min(100).max(10_000_000).default(500_000),
    SMTP_URL: z.string().optional(),
    PUBLIC_URL: z.string().url().optional(),
    FIRM_NAME: z.string().default('Runnel'),
  })
  .superRefine((c, ctx) => {
    if (c.NODE_ENV === 'production' && !c.SESSION_SECRET) {
      ctx.addIssue({ code: 'custom', path: ['SESSION_SECRET'], message: 'SESSION_SECRET is required in production' });
    }
    if (c.NODE_ENV === 'production' && c.RUNNEL_DEMO) {
      ctx.addIssue({ code: 'custom', path: ['RUNNEL_DEMO'], message: 'demo mode is never allowed in production' });
    }
  });

export type Config = z.infer<typeof configSchema> & { SESSION_SECRET: string };

export class ConfigError extends Error {}

/** Parse the environment; throw one readable error listing every bad setting. */
export function loadConfig(env: NodeJS.ProcessEnv = process.env): Config {
  const cleaned = Object.fromEntries(Object.entries(env).filter(([, v]) => v !== undefined && v !== ''));
  const parsed = configSchema.safeParse(cleaned);
  if (!parsed.success) {
    const lines = parsed.error.issues.map((i) => `  ${i.path.join('.') || '(env)'}: ${i.message}`);
    throw new ConfigError(`Invalid settings:\n${lines.join('\n')}`);
  }
  const c = parsed.data;
  return {
    ...c,
    // Outside production a fixed development secret is acceptable: sessions live on loopback only.
    SESSION_SECRET: c.SESSION_SECRET ?? 'runnel-development-session-secret-not-for-production',
  };
}
