/** Shapes the API returns (the request bodies come from server/contracts). */
import type { Me, Restrictions, Role, UnitSystem, Warning } from '../../server/contracts/index';
import type { headTypes, plantTypes, soilTextures } from '../../server/contracts/zones';

export type { Me, Restrictions, Role, UnitSystem, Warning };

export type Site = {
  id: number;
  name: string;
  address: string;
  timezone: string;
  latitude: number;
  longitude: number;
  elevationM: number;
  supplyFlowLpm: number;
  staticPressureKPa: number;
  supplyMarginPct: number;
  /** Within a few km of a large body of water (changes the temperature-only radiation estimate). */
  coastal: boolean;
  restrictions: Restrictions;
  notes: string;
  usableSupplyLpm: number;
};

export type SiteSummary = Site & {
  controllerCount: number;
  onlineControllers: number;
  zoneCount: number;
  warnings: Warning[];
};

export type Controller = {
  id: number;
  serial: string;
  name: string;
  siteId: number;
  relayCount: number;
  firmwareVersion: string;
  staggerMs: number;
  maxConcurrentValves: number;
  masterValveRelay: number | null;
  hasFlowSensor: boolean;
  online: boolean;
  lastSeenAt: string | null;
  retiredAt: string | null;
  hasSecret: boolean;
};

export type Zone = {
  id: number;
  controllerId: number;
  siteId: number;
  relay: number;
  name: string;
  plantType: (typeof plantTypes)[number];
  soilTexture: (typeof soilTextures)[number];
  headType: (typeof headTypes)[number];
  /** Another head type found on this valve; null = none. */
  otherHeadType: (typeof headTypes)[number] | null;
  headCount: number;
  flowPerHeadLpm: number;
  areaM2: number;
  rootDepthM: number;
  efficiency: number;
  notes: string;
  flowLpm: number;
  precipitationRateMmH: number;
  warnings: Warning[];
};

export type SiteDetail = Site & { controllers: Controller[]; zones: Zone[]; warnings: Warning[] };

export type FieldDetail = { path: string; message: string; code?: string };
