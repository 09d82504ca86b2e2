/** Shapes of the supply, planning, watering-need and weather answers (all metric). */
import type { Zone } from './api';
import type { CsvRowError } from '../../server/contracts/weather';

export type { CsvRowError };

export type SupplySummary = {
  id: number;
  name: string;
  supplyFlowLpm: number;
  supplyMarginPct: number;
  usableSupplyLpm: number;
  staticPressureKPa: number;
};

export type SupplyTest = {
  id: number;
  siteId: number;
  kind: 'bucket' | 'meter';
  volumeL: number | null;
  seconds: number | null;
  meterStartL: number | null;
  meterEndL: number | null;
  minutes: number | null;
  flowLpm: number;
  usableSupplyLpm: number;
  staticPressureKPa: number | null;
  note: string;
  applied: boolean;
  recordedBy: { id: number; name: string } | null;
  recordedAt: string;
};

export type SupplyTestList = { site: SupplySummary; items: SupplyTest[] };
export type SupplyTestSaved = { test: SupplyTest; usableSupplyLpm: number; site: SupplySummary };

export type PlanningWarning = { code: 'over_supply' | 'velocity_high' | 'mixed_spray_rotor' | 'mixed_head_types'; message: string; value?: number; limit?: number };

export type PlannedZone = {
  id: number;
  name: string;
  controllerId: number;
  controllerName: string;
  relay: number;
  headType: Zone['headType'];
  otherHeadType: Zone['otherHeadType'];
  headCount: number;
  flowPerHeadLpm: number;
  areaM2: number;
  flowLpm: number;
  maxHeadsPerZone: number;
  headsOverLimit: number;
  precipitationRateMmH: number;
  pipeVelocityMs: number;
  frictionLossM: number;
  frictionLossKPa: number;
  warnings: PlanningWarning[];
};

export type SitePlanning = {
  site: SupplySummary;
  pipe: { innerDiameterMm: number; lengthM: number; c: number };
  zones: PlannedZone[];
};

export type PipeQuery = { pipeMm: number; pipeLengthM: number; c: number };

export type ProposedZone = { headType: Zone['headType']; headIds: string[]; headCount: number; flowLpm: number };
export type GroupHeadsResult = { usableSupplyLpm: number; zoneCount: number; zones: ProposedZone[] };

export type ZoneNeed = {
  id: number;
  name: string;
  controllerId: number;
  controllerName: string;
  relay: number;
  plantType: Zone['plantType'];
  soilTexture: Zone['soilTexture'];
  headType: Zone['headType'];
  precipitationRateMmH: number;
  efficiency: number;
  intakeRateMmH: number;
  et0Mm: number;
  plantCoefficient: number | null;
  plantDemandMm: number;
  rainMm: number;
  effectiveRainMm: number;
  depletionMm: number;
  tawMm: number;
  rawMm: number | null;
  needsWater: boolean;
  netDepthMm: number;
  grossDepthMm: number;
  minutes: number;
  cycles: number[];
  soakMinutes: number;
  runoffExpected: boolean;
};

export type WateringNeed = {
  site: { id: number; name: string; latitude: number };
  from: string;
  to: string;
  days: number;
  daysWithWeather: number;
  missingDates: string[];
  totals: { et0Mm: number; rainMm: number };
  series: { date: string; et0Mm: number; rainMm: number }[];
  zones: ZoneNeed[];
};

export type WeatherDay = {
  siteId: number;
  date: string;
  tmaxC: number;
  tminC: number;
  rhMaxPct: number | null;
  rhMinPct: number | null;
  windMs: number | null;
  windHeightM: number | null;
  sunshineH: number | null;
  solarMj: number | null;
  rainMm: number;
  et0Mm: number;
  et0Method: string;
  et0Fallbacks: string[];
  source: 'manual' | 'csv' | 'service';
  updatedAt: string;
};

export type CsvPreviewRow = {
  line: number;
  date: string;
  tmaxC: number;
  tminC: number;
  rhMaxPct: number | null;
  rhMinPct: number | null;
  windMs: number | null;
  windHeightM: number | null;
  sunshineH: number | null;
  solarMj: number | null;
  rainMm: number;
  et0Mm: number;
  et0Method: string;
  replaces: boolean;
};

export type CsvImportResult = {
  dryRun: boolean;
  saved: number;
  rowCount: number;
  validCount: number;
  errorCount: number;
  replaceCount: number;
  rows: CsvPreviewRow[];
  errors: CsvRowError[];
};

export type WeatherFetchResult = {
  from: string;
  to: string;
  received: number;
  saved: number;
  keptLocal: string[];
  missing: string[];
  items: WeatherDay[];
};
