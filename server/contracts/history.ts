import { z } from 'zod';
import { isoDate } from './weather';

/** The final (or current) states of a zone run, as stored. */
export const zoneRunStates = ['planned', 'running', 'completed', 'stopped', 'held_rain', 'skipped_restriction', 'skipped_not_needed', 'failed'] as const;
export type ZoneRunState = (typeof zoneRunStates)[number];

/** States that mean a run did not happen as planned (the review lists these with their reasons). */
export const notAsPlannedStates = ['held_rain', 'skipped_restriction', 'skipped_not_needed', 'failed', 'stopped'] as const;

const id = z.coerce.number().int().positive();
/** A moment: a full ISO timestamp, or a date YYYY-MM-DD (taken in the site's timezone). */
const moment = z.union([isoDate, z.iso.datetime({ offset: true })]);

/** "completed" or "completed,stopped" or ?state=a&state=b. */
const stateList = z
  .union([z.string(), z.array(z.string())])
  .transform((v) => (Array.isArray(v) ? v : v.split(',')).map((s) => s.trim()).filter(Boolean))
  .pipe(z.array(z.enum(zoneRunStates)).min(1).max(zoneRunStates.length));

export const runHistorySorts = ['plannedStart', 'zone', 'site', 'state', 'plannedMinutes', 'actualMinutes', 'litres'] as const;

/** Filters shared by the run-history page and its CSV export. */
export const runHistoryFilterSchema = z.object({
  siteId: id.optional(),
  zoneId: id.optional(),
  /** A program id, or "manual" for runs that belong to no program. */
  programId: z.union([z.literal('manual'), id]).optional(),
  /** Inclusive. A date means that local day at each run's site. */
  from: moment.optional(),
  /** Inclusive for a date (the whole local day); exclusive for a timestamp. */
  to: moment.optional(),
  state: stateList.optional(),
  sort: z.enum(runHistorySorts).default('plannedStart'),
  order: z.enum(['asc', 'desc']).default('desc'),
});
export type RunHistoryFilter = z.infer<typeof runHistoryFilterSchema>;

export const runHistoryQuerySchema = runHistoryFilterSchema.extend({
  page: z.coerce.number().int().min(1).max(100_000).default(1),
  pageSize: z.coerce.number().int().min(1).max(200).default(25),
});
export type RunHistoryQuery = z.infer<typeof runHistoryQuerySchema>;

export type LitresBasis = 'measured' | 'estimated';

export type RunHistoryRow = {
  id: number;
  runId: number;
  siteId: number;
  siteName: string;
  zoneId: number;
  zoneName: string;
  controllerId: number;
  programId: number | null;
  programName: string | null;
  /** 'program', 'manual', 'walk' … from the run. */
  runKind: string;
  cycle: number;
  /** Local calendar day at the site of the planned start. */
  localDate: string;
  plannedStart: string;
  plannedEnd: string;
  plannedMinutes: number;
  actualStart: string | null;
  actualEnd: string | null;
  actualMinutes: number | null;
  /** Measured litres when the flow sensor measured the run, else the estimate (0 when no water went down). */
  litres: number;
  litresBasis: LitresBasis;
  measuredLitres: number | null;
  estimatedLitres: number | null;
  state: ZoneRunState;
  reason: string | null;
};

export type RunHistoryPage = {
  items: RunHistoryRow[];
  page: number;
  pageSize: number;
  /** Rows matching the filter, counted up to 10,000; totalIsExact is false beyond that. */
  total: number;
  totalIsExact: boolean;
  sort: (typeof runHistorySorts)[number];
  order: 'asc' | 'desc';
};

export const waterUseBuckets = ['day', 'week', 'month'] as const;
export type WaterUseBucket = (typeof waterUseBuckets)[number];

export const waterUseQuerySchema = z
  .object({
    siteId: id,
    zoneId: id.optional(),
    from: isoDate.optional(),
    to: isoDate.optional(),
    bucket: z.enum(waterUseBuckets).default('day'),
  })
  .refine((q) => !q.from || !q.to || q.from <= q.to, { path: ['to'], message: '“to” must not be before “from”' });
export type WaterUseQuery = z.infer<typeof waterUseQuerySchema>;

/** 'mixed' = some runs measured, some estimated; 'none' = no water went down. */
export type WaterBasis = 'measured' | 'estimated' | 'mixed' | 'none';

export type WaterUsePoint = {
  /** First local date of the bucket (a Monday for weeks, the 1st for months). */
  period: string;
  /** Last local date of the bucket inside the asked range. */
  periodEnd: string;
  litres: number;
  measuredLitres: number;
  estimatedLitres: number;
  basis: WaterBasis;
  /** litres / area, mm. */
  appliedMm: number;
  /** Σ ET₀ × plant coefficient over days with weather, mm (area-weighted for several zones). */
  demandMm: number | null;
  demandLitres: number | null;
  et0Mm: number | null;
  rainMm: number | null;
  effectiveRainMm: number | null;
  /** Days of the bucket that have weather. */
  weatherDays: number;
  runs: number;
  minutes: number;
  /** The bucket before this one (month before, for months), and the change in litres, %. */
  previousLitres: number;
  changePct: number | null;
};

export type WaterUseResponse = {
  site: { id: number; name: string; timezone: string; areaM2: number };
  from: string;
  to: string;
  bucket: WaterUseBucket;
  series: WaterUsePoint[];
  totals: Omit<WaterUsePoint, 'period' | 'periodEnd' | 'previousLitres' | 'changePct'>;
  zones: {
    zoneId: number;
    name: string;
    areaM2: number;
    plantType: string;
    hasFlowSensor: boolean;
    series: WaterUsePoint[];
    totals: WaterUseResponse['totals'];
  }[];
};

export const readingsQuerySchema = z
  .object({
    from: z.iso.datetime({ offset: true }).optional(),
    to: z.iso.datetime({ offset: true }).optional(),
    points: z.coerce.number().int().min(10).max(5000).default(500),
  })
  .refine((q) => !q.from || !q.to || Date.parse(q.from) < Date.parse(q.to), { path: ['to'], message: '“to” must be after “from”' });

export type ReadingBucket = {
  /** Start of the time bucket. */
  at: string;
  n: number;
  moistureAvg: number;
  moistureMin: number;
  moistureMax: number;
  supplyVAvg: number;
  supplyVMin: number;
  supplyVMax: number;
  flowAvg: number | null;
  flowMin: number | null;
  flowMax: number | null;
};

export type ValveMark = { at: string; relay: number; zoneId: number | null; open: boolean; source: string };

export type ReadingsResponse = {
  controllerId: number;
  from: string;
  to: string;
  bucketMs: number;
  series: ReadingBucket[];
  valveEvents: ValveMark[];
  valveEventsTruncated: boolean;
};

export const reviewQuerySchema = z
  .object({ from: isoDate.optional(), to: isoDate.optional() })
  .refine((q) => !q.from || !q.to || q.from <= q.to, { path: ['to'], message: '“to” must not be before “from”' });
