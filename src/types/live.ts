/** What /ws sends: a snapshot on every (re)connect, then change events (server/live/). */
import type {
  CommandLiveEvent,
  ControllerLiveEvent,
  RainLiveEvent,
  ReadingLiveEvent,
  ValveLiveEvent,
} from '../../server/live/events';

export type { CommandLiveEvent, ControllerLiveEvent, RainLiveEvent, ReadingLiveEvent, ValveLiveEvent };

export type LatestReading = {
  at: string | null;
  moisturePct: number;
  supplyV: number;
  flowLpm: number | null;
  rssi: number;
  rain: boolean;
};

export type RecentPoint = { at: string | null; moisturePct: number; flowLpm: number | null; supplyV: number };

export type SnapshotController = {
  controllerId: number;
  siteId: number;
  serial: string;
  name: string;
  online: boolean;
  lastSeenAt: string | null;
  rain: boolean;
  hasFlowSensor: boolean;
  latest: LatestReading | null;
  recent: RecentPoint[];
};

export type SnapshotValve = {
  siteId: number;
  controllerId: number;
  zoneId: number | null;
  relay: number;
  master: boolean;
  since: string | null;
  plannedEnd: string | null;
};

export type SnapshotQueued = {
  siteId: number;
  zoneId: number;
  controllerId: number;
  position: number;
  seconds: number;
  origin: string;
  commandId: string;
};

export type LiveSnapshot = {
  type: 'snapshot';
  at: string;
  sites: { id: number; name: string; timezone: string; rain: boolean }[];
  controllers: SnapshotController[];
  openValves: SnapshotValve[];
  queued: SnapshotQueued[];
};

export type LiveMessage =
  | LiveSnapshot
  | ValveLiveEvent
  | ControllerLiveEvent
  | ReadingLiveEvent
  | RainLiveEvent
  | CommandLiveEvent
  | { type: 'pong'; at: string }
  | { type: 'error'; code: string; message: string };

/** Any frame with a `type`; kinds this client does not know yet (alerts, runs…) are ignored. */
export type LiveFrame = { type: string; [k: string]: unknown };

/** POST /api/zones/:id/start → 202. */
export type StartResponse = {
  commandId: string;
  state: 'sent' | 'queued';
  reason?: string;
  zoneId: number;
  minutes: number;
  message: string;
};

/** GET /api/sites/:id/activity. plannedEnd is epoch milliseconds. */
export type SiteActivity = {
  active: { zoneId: number; controllerId: number; relay: number; state: 'opening' | 'open' | 'closing'; plannedEnd: number | null; origin: string; flowLpm: number }[];
  queue: { zoneId: number; controllerId: number; position: number; seconds: number; origin: string; commandId: string }[];
};
