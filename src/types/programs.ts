/** Shapes of the programs, timeline, runs, rain-delay and walk-test API (request bodies come from server/contracts/programs). */
import type { CreateProgram } from '../../server/contracts/programs';

export type DayRule = CreateProgram['dayRule'];
export type CycleSoak = 'off' | 'auto' | 'manual';
export type ProgramMode = 'fixed' | 'seasonal' | 'weather';

export type ProgramZone = {
  zoneId: number;
  position: number;
  minutes: number;
  cycleSoak: CycleSoak;
  cycleMinutes: number | null;
  soakMinutes: number | null;
};

export type ProgramWarning = { code: 'overlap' | 'runs_into_window' | string; message: string };

export type Program = {
  id: number;
  siteId: number;
  name: string;
  enabled: boolean;
  startTimes: string[];
  dayRule: DayRule;
  crons: string[];
  activeFrom: string | null;
  activeTo: string | null;
  mode: ProgramMode;
  seasonalPct: number;
  zones: ProgramZone[];
  nextStarts: string[];
  warnings: ProgramWarning[];
};

export type Hold = { kind: 'sensor' | 'after_rain' | 'delay'; reason: string; until: number | string | null };

export type TimelineSlot = {
  programId: number;
  programName: string;
  zoneId: number;
  zoneName: string;
  cycle: number;
  start: string;
  end: string;
  litres: number;
  status: 'planned' | 'restricted' | 'held';
  reason: string | null;
};

export type Timeline = {
  siteId: number;
  timezone: string;
  from: string;
  to: string;
  hold: Hold | null;
  slots: TimelineSlot[];
  windows: { start: string; end: string; reason: string }[];
  restrictedDays: { date: string; reason: string }[];
  days: { date: string; litres: number }[];
};

export type RunState = 'planned' | 'running' | 'completed' | 'partial' | 'held_rain' | 'skipped_restriction' | 'failed' | 'cancelled';
export type ZoneRunState = 'planned' | 'running' | 'completed' | 'stopped' | 'held_rain' | 'skipped_restriction' | 'skipped_not_needed' | 'failed';

export type ZoneRun = {
  id: number;
  zoneId: number;
  cycle: number;
  plannedStart: string;
  plannedEnd: string;
  plannedMinutes: number;
  actualStart: string | null;
  actualEnd: string | null;
  actualMinutes: number | null;
  estimatedLitres: number | null;
  measuredLitres: number | null;
  state: ZoneRunState;
  reason: string | null;
};

export type Run = {
  id: number;
  siteId: number;
  programId: number | null;
  programName: string | null;
  kind: string;
  scheduledFor: string;
  state: RunState;
  reason: string | null;
  endedAt: string | null;
  zones: ZoneRun[];
};

export type WalkResult = {
  zoneId: number;
  zoneName: string;
  opened: boolean;
  acknowledged: boolean;
  flowSeenLpm: number | null;
  expectedFlowLpm: number;
  startedAt: string | null;
  endedAt: string | null;
  outcome: 'pending' | 'ok' | 'failed' | 'skipped';
  error?: string;
};

export type Walk = {
  id: string;
  siteId: number;
  minutes: number;
  state: 'running' | 'done' | 'stopped';
  index: number;
  total: number;
  current: { id: number; name: string; controllerId: number; flowLpm: number; hasFlowSensor: boolean } | null;
  currentEndsAt: string | null;
  results: WalkResult[];
};

/** Live events the scheduler, rain delay and walk service publish on /ws. */
export type RunLiveEvent = { type: 'run'; siteId: number; runId: number; state: RunState; reason: string | null };
export type ZoneRunLiveEvent = { type: 'zone_run'; siteId: number; runId: number; zoneId: number; zoneRunId: number; state: ZoneRunState; reason: string | null };
export type HoldLiveEvent = { type: 'hold'; siteId: number; kind: Hold['kind'] | 'none'; reason: string | null; until?: string };
export type WalkLiveEvent = { type: 'walk'; siteId: number; walk: Walk };
