/** Shapes of the history, water-use, review, alerts and mail API (docs/api-history.md). */
export type {
  LitresBasis, RunHistoryPage, RunHistoryRow, WaterBasis, WaterUsePoint, WaterUseResponse, WaterUseBucket, ZoneRunState,
} from '../../server/contracts/history';
export type { AlertKind, AlertListResponse, AlertLiveEvent, AlertSeverity, AlertState, AlertView, MailDelivery, MailPreferences, MailPreferencesView } from '../../server/contracts/alerts';

export type MissCategory = 'rain_hold' | 'restriction' | 'not_needed' | 'fault' | 'stopped';

export type ReviewMissedRun = {
  runId: number;
  programId: number | null;
  programName: string | null;
  localDate: string;
  plannedStart: string;
  state: string;
  category: MissCategory;
  reason: string | null;
  cycles: number;
  plannedMinutes: number;
};

export type ReviewDepletionDay = {
  date: string;
  et0Mm: number;
  kc: number;
  etcMm: number;
  rainMm: number;
  effectiveRainMm: number;
  irrigationMm: number;
  depletionMm: number;
  rawMm: number;
  needsWater: boolean;
};

export type ReviewZone = {
  zoneId: number;
  name: string;
  plantType: string;
  areaM2: number;
  efficiency: number;
  hasFlowSensor: boolean;
  demandMm: number;
  rainMm: number;
  effectiveRainMm: number;
  litres: number;
  litresBasis: string;
  appliedMm: number;
  appliedNetMm: number;
  demandMetPct: number | null;
  tawMm: number;
  stressDays: number;
  finalDepletionMm: number | null;
  maxDepletionMm: number | null;
  depletion: ReviewDepletionDay[];
  notAsPlanned: ReviewMissedRun[];
  counts: Record<MissCategory, number>;
  summary: string;
};

export type ReviewResponse = {
  site: { id: number; name: string; timezone: string };
  from: string;
  to: string;
  days: number;
  weatherDays: number;
  missingWeatherDays: string[];
  warmUpDays: number;
  summary: string[];
  zones: ReviewZone[];
};
