import type { ValveSource } from '../contracts/protocol';

/** Domain events pushed to browsers. Every one names its site; the hub filters by who may see it. */
export type ValveLiveEvent = {
  type: 'valve';
  siteId: number;
  controllerId: number;
  zoneId: number | null;
  relay: number;
  open: boolean;
  at: string;
  source: ValveSource;
  since: string | null;
  plannedEnd: string | null;
};
export type ControllerLiveEvent = { type: 'controller'; siteId: number; controllerId: number; online: boolean; lastSeenAt: string | null };
export type ReadingLiveEvent = {
  type: 'reading';
  siteId: number;
  controllerId: number;
  at: string;
  rain: boolean;
  moisturePct: number;
  supplyV: number;
  flowLpm: number | null;
  rssi: number;
};
export type RainLiveEvent = { type: 'rain'; siteId: number; controllerId: number; tripped: boolean; at: string };
export type CommandLiveEvent = {
  type: 'command';
  siteId: number;
  commandId: string;
  zoneId: number | null;
  controllerId: number;
  op: string;
  state: 'queued' | 'sent' | 'acked' | 'failed' | 'cancelled';
  message?: string;
  /** Only this user receives it when set (the one who asked). */
  userId?: number | null;
};

export type LiveEvent = ValveLiveEvent | ControllerLiveEvent | ReadingLiveEvent | RainLiveEvent | CommandLiveEvent | ({ type: string; siteId: number } & Record<string, unknown>);
