import { z } from 'zod';

/**
 * What the alert engine can conclude from the boards:
 *   controller_offline  no contact for longer than ALERT_OFFLINE_SECONDS
 *   command_failed      a command was not acknowledged after its retries (or the board refused it)
 *   valve_stuck_open    a board reports a valve open that the server has not asked to be open
 *   flow_while_closed   the flow sensor reads flow while every valve is closed (a leak or a stuck valve)
 *   high_flow           flow well above the open zone's nominal flow (a broken head or pipe)
 *   low_flow            flow well below it (a clogged filter or nozzle)
 *   low_voltage         the transformer's supply is low
 *   rain_hold           information: the rain sensor holds watering, until the hold ends
 */
export const alertKinds = [
  'controller_offline', 'command_failed', 'valve_stuck_open', 'flow_while_closed', 'high_flow', 'low_flow', 'low_voltage', 'rain_hold',
] as const;
export type AlertKind = (typeof alertKinds)[number];

export const alertSeverities = ['critical', 'warning', 'info'] as const;
export type AlertSeverity = (typeof alertSeverities)[number];

export const alertStates = ['open', 'acknowledged', 'resolved'] as const;
export type AlertState = (typeof alertStates)[number];

export const alertSeverityOf: Record<AlertKind, AlertSeverity> = {
  controller_offline: 'critical',
  command_failed: 'warning',
  valve_stuck_open: 'critical',
  flow_while_closed: 'critical',
  high_flow: 'warning',
  low_flow: 'warning',
  low_voltage: 'warning',
  rain_hold: 'info',
};

export type AlertView = {
  id: number;
  siteId: number;
  siteName: string;
  controllerId: number | null;
  controllerName: string | null;
  zoneId: number | null;
  zoneName: string | null;
  kind: AlertKind;
  severity: AlertSeverity;
  state: AlertState;
  title: string;
  message: string;
  details: Record<string, unknown>;
  openedAt: string;
  lastSeenAt: string;
  acknowledgedAt: string | null;
  acknowledgedBy: { id: number; name: string } | null;
  resolvedAt: string | null;
  resolution: string | null;
};

/** Pushed on the live socket to everyone who may see the site. */
export type AlertLiveEvent = { type: 'alert'; siteId: number; change: 'raised' | 'acknowledged' | 'resolved'; alert: AlertView };

const id = z.coerce.number().int().positive();
const list = <T extends readonly [string, ...string[]]>(values: T) =>
  z
    .union([z.string(), z.array(z.string())])
    .transform((v) => (Array.isArray(v) ? v : v.split(',')).map((s) => s.trim()).filter(Boolean))
    .pipe(z.array(z.enum(values)).min(1));

export const alertListQuerySchema = z.object({
  /** 'active' = open and acknowledged (the default); or a list of states. */
  state: z.union([z.literal('active'), z.literal('all'), list(alertStates)]).default('active'),
  kind: list(alertKinds).optional(),
  siteId: id.optional(),
  controllerId: id.optional(),
  zoneId: id.optional(),
  page: z.coerce.number().int().min(1).max(100_000).default(1),
  pageSize: z.coerce.number().int().min(1).max(200).default(50),
});
export type AlertListQuery = z.infer<typeof alertListQuerySchema>;

export type AlertListResponse = {
  items: AlertView[];
  page: number;
  pageSize: number;
  total: number;
  /** Over every site the person may see, whatever the filter: for the badge. */
  counts: { open: number; acknowledged: number; openBySeverity: Record<AlertSeverity, number> };
};

export const mailDeliveries = ['immediate', 'daily_digest', 'off'] as const;
export type MailDelivery = (typeof mailDeliveries)[number];

export const mailPreferencesSchema = z.strictObject({
  /** Alert kinds the person wants mail about. */
  alertKinds: z.array(z.enum(alertKinds)).max(alertKinds.length).transform((a) => [...new Set(a)]),
  /** One mail per alert (throttled per kind), one digest a day, or none. */
  alertDelivery: z.enum(mailDeliveries),
  /** Owners: the weekly water-use summary of their sites. */
  weeklySummary: z.boolean(),
});
export type MailPreferences = z.infer<typeof mailPreferencesSchema>;
export type MailPreferencesView = MailPreferences & { isDefault: boolean; email: string };
