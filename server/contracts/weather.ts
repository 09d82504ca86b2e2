import { z } from 'zod';

/** A calendar date written YYYY-MM-DD that exists (no 2025-02-30). */
export const isoDate = z
  .string()
  .regex(/^\d{4}-\d{2}-\d{2}$/, 'Use a date written YYYY-MM-DD')
  .refine((s) => {
    const [y, m, d] = s.split('-').map(Number);
    const t = new Date(Date.UTC(y, m - 1, d));
    return y >= 1900 && t.getUTCFullYear() === y && t.getUTCMonth() === m - 1 && t.getUTCDate() === d;
  }, 'Not a calendar date');

export const weatherSources = ['manual', 'csv', 'service'] as const;
export type WeatherSource = (typeof weatherSources)[number];

const opt = <T extends z.ZodType>(s: T) => s.nullish().transform((v) => v ?? null);

/** Plausible ranges of each measurement (metric). */
export const weatherLimits = {
  tmaxC: z.number().min(-60, 'Tmax between −60 and 60 °C').max(60, 'Tmax between −60 and 60 °C'),
  tminC: z.number().min(-90, 'Tmin between −90 and 60 °C').max(60, 'Tmin between −90 and 60 °C'),
  rhMaxPct: z.number().min(0, 'Humidity between 0 and 100 %').max(100, 'Humidity between 0 and 100 %'),
  rhMinPct: z.number().min(0, 'Humidity between 0 and 100 %').max(100, 'Humidity between 0 and 100 %'),
  windMs: z.number().min(0, 'Wind speed cannot be negative').max(75, 'Wind speed at most 75 m/s'),
  windHeightM: z.number().min(0.5, 'Wind height between 0.5 and 100 m').max(100, 'Wind height between 0.5 and 100 m'),
  sunshineH: z.number().min(0, 'Sunshine hours between 0 and 24').max(24, 'Sunshine hours between 0 and 24'),
  solarMj: z.number().min(0, 'Solar radiation cannot be negative').max(50, 'Solar radiation at most 50 MJ/m²'),
  rainMm: z.number().min(0, 'Rain cannot be negative').max(1000, 'Rain at most 1000 mm a day'),
};

/**
 * One day of weather as a person types it in (metric). Only Tmax and Tmin are required;
 * ET₀ follows FAO-56's own procedures for whatever is missing. Rain defaults to 0 mm.
 */
export const weatherDayFields = {
  tmaxC: weatherLimits.tmaxC,
  tminC: weatherLimits.tminC,
  rhMaxPct: opt(weatherLimits.rhMaxPct),
  rhMinPct: opt(weatherLimits.rhMinPct),
  windMs: opt(weatherLimits.windMs),
  windHeightM: opt(weatherLimits.windHeightM),
  sunshineH: opt(weatherLimits.sunshineH),
  solarMj: opt(weatherLimits.solarMj),
  rainMm: weatherLimits.rainMm.default(0),
};

type DayShape = { tmaxC: number; tminC: number; rhMaxPct: number | null; rhMinPct: number | null };

/** Checks across fields, shared by the form and the CSV rows. */
export function checkDayConsistency(d: DayShape, ctx: z.RefinementCtx, names = { tminC: 'tminC', rhMinPct: 'rhMinPct' }) {
  if (d.tminC > d.tmaxC) {
    ctx.addIssue({ code: 'custom', path: [names.tminC], message: 'Tmin must not be above Tmax' });
  }
  if (d.rhMaxPct !== null && d.rhMinPct !== null && d.rhMinPct > d.rhMaxPct) {
    ctx.addIssue({ code: 'custom', path: [names.rhMinPct], message: 'RHmin must not be above RHmax' });
  }
}

export const weatherDayInputSchema = z
  .strictObject({ ...weatherDayFields, rainMm: weatherDayFields.rainMm.default(0) })
  .superRefine((d, ctx) => checkDayConsistency(d, ctx));
export type WeatherDayInput = z.infer<typeof weatherDayInputSchema>;

export const weatherDateParam = z.object({ id: z.coerce.number().int().positive(), date: isoDate });

export const weatherRangeQuery = z
  .object({ from: isoDate.optional(), to: isoDate.optional() })
  .refine((q) => !q.from || !q.to || q.from <= q.to, { message: '"from" must not be after "to"', path: ['from'] });

/** Longest range one fetch from the weather service may ask for, days. */
export const MAX_FETCH_DAYS = 366;

export const weatherFetchSchema = z
  .strictObject({
    from: isoDate,
    to: isoDate,
    /** Also overwrite days typed in or imported from CSV (default: keep local measurements). */
    replaceLocal: z.boolean().default(false),
  })
  .refine((q) => q.from <= q.to, { message: '"from" must not be after "to"', path: ['from'] });
export type WeatherFetch = z.infer<typeof weatherFetchSchema>;

export const importQuery = z.object({
  dryRun: z
    .enum(['0', '1', 'true', 'false'])
    .optional()
    .transform((v) => v === '1' || v === 'true'),
});

// ---------------------------------------------------------------------------------------
// CSV import

/** Columns of the weather CSV, in template order. Only date, tmax_c and tmin_c are required. */
export const csvColumns = [
  'date',
  'tmax_c',
  'tmin_c',
  'rh_max_pct',
  'rh_min_pct',
  'wind_ms',
  'wind_height_m',
  'sunshine_h',
  'solar_mj',
  'rain_mm',
] as const;
export type CsvColumn = (typeof csvColumns)[number];
export const requiredCsvColumns: readonly CsvColumn[] = ['date', 'tmax_c', 'tmin_c'];

/** CSV column ↔ API field. */
export const csvColumnField = {
  date: 'date',
  tmax_c: 'tmaxC',
  tmin_c: 'tminC',
  rh_max_pct: 'rhMaxPct',
  rh_min_pct: 'rhMinPct',
  wind_ms: 'windMs',
  wind_height_m: 'windHeightM',
  sunshine_h: 'sunshineH',
  solar_mj: 'solarMj',
  rain_mm: 'rainMm',
} as const satisfies Record<CsvColumn, string>;

/** Largest upload, bytes, and most rows in one file. */
export const CSV_MAX_BYTES = 5 * 1024 * 1024;
export const CSV_MAX_ROWS = 20_000;

const cell = (inner: z.ZodNumber) =>
  z
    .string()
    .trim()
    .transform((s, ctx) => {
      if (s === '') return null;
      if (!/^[-+]?(\d+\.?\d*|\.\d+)$/.test(s)) {
        ctx.addIssue({ code: 'custom', message: `"${s.slice(0, 20)}" is not a number (use a dot for decimals)` });
        return z.NEVER;
      }
      return Number(s);
    })
    .pipe(inner.nullable());

const requiredCell = (inner: z.ZodNumber) =>
  cell(inner).refine((v) => v !== null, { message: 'A value is required' }).transform((v) => v as number);

/** One CSV row, keyed by CSV column; empty cells are absent data (rain: 0 mm). */
export const csvRowSchema = z
  .object({
    date: z.string().trim().pipe(isoDate),
    tmax_c: requiredCell(weatherLimits.tmaxC),
    tmin_c: requiredCell(weatherLimits.tminC),
    rh_max_pct: cell(weatherLimits.rhMaxPct),
    rh_min_pct: cell(weatherLimits.rhMinPct),
    wind_ms: cell(weatherLimits.windMs),
    wind_height_m: cell(weatherLimits.windHeightM),
    sunshine_h: cell(weatherLimits.sunshineH),
    solar_mj: cell(weatherLimits.solarMj),
    rain_mm: cell(weatherLimits.rainMm),
  })
  .transform((r) => ({
    date: r.date,
    tmaxC: r.tmax_c,
    tminC: r.tmin_c,
    rhMaxPct: r.rh_max_pct,
    rhMinPct: r.rh_min_pct,
    windMs: r.wind_ms,
    windHeightM: r.wind_height_m,
    sunshineH: r.sunshine_h,
    solarMj: r.solar_mj,
    rainMm: r.rain_mm ?? 0,
  }))
  .superRefine((d, ctx) => checkDayConsistency(d, ctx, { tminC: 'tmin_c', rhMinPct: 'rh_min_pct' }));
export type CsvRow = z.infer<typeof csvRowSchema>;

export type CsvRowError = { line: number; field: string | null; message: string };

// ---------------------------------------------------------------------------------------
// The weather service's answer (our own format, see docs/weather.md)

export const serviceDaySchema = z.object({
  date: isoDate,
  tmaxC: z.number(),
  tminC: z.number(),
  rhMaxPct: z.number().nullable().optional(),
  rhMinPct: z.number().nullable().optional(),
  windMs: z.number().nullable().optional(),
  windHeightM: z.number().nullable().optional(),
  sunshineH: z.number().nullable().optional(),
  solarMj: z.number().nullable().optional(),
  rainMm: z.number().nullable().optional(),
});
export const serviceDailyResponseSchema = z.object({
  version: z.literal(1),
  location: z.object({ lat: z.number(), lon: z.number() }),
  days: z.array(serviceDaySchema),
});
export type ServiceDay = z.infer<typeof serviceDaySchema>;
export type ServiceDailyResponse = z.infer<typeof serviceDailyResponseSchema>;

/** Watering need over the last `days` days ending `to` (default: today at the site). */
export const wateringNeedQuery = z.object({
  days: z.coerce.number().int().min(1, 'At least 1 day').max(60, 'At most 60 days').default(7),
  to: isoDate.optional(),
});
