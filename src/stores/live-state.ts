import type {
  CommandLiveEvent,
  ControllerLiveEvent,
  LatestReading,
  LiveFrame,
  LiveSnapshot,
  RainLiveEvent,
  ReadingLiveEvent,
  RecentPoint,
  SnapshotController,
  ValveLiveEvent,
} from '../types/live';

/**
 * The live picture and how each frame changes it: plain functions over a plain object, so the
 * store stays small and the rules can be read in one place. One handler per frame type.
 */

/** Recent readings kept per controller for the sparklines. */
export const RECENT_CAP = 120;
/** How long a finished command is kept (for the rows' "confirmed" / "failed" moments). */
export const FINISHED_COMMAND_MS = 30_000;

export type LiveController = Omit<SnapshotController, 'latest'> & { latest: LatestReading | null };

export type OpenValve = {
  siteId: number;
  controllerId: number;
  zoneId: number | null;
  relay: number;
  /** Epoch ms, server clock. */
  since: number | null;
  plannedEnd: number | null;
  source: string | null;
};

export type QueuedStart = { siteId: number; zoneId: number; controllerId: number; commandId: string; seconds: number | null; origin: string };

export type CommandState = CommandLiveEvent['state'];
export type PendingCommand = {
  commandId: string;
  siteId: number;
  zoneId: number | null;
  controllerId: number;
  state: CommandState;
  message: string | null;
  userId: number | null;
  /** Run length when known (our own starts, queued items). */
  seconds: number | null;
  updatedAt: number;
};

export type LiveState = {
  sites: Record<number, { id: number; name: string; timezone: string }>;
  controllers: Record<number, LiveController>;
  /** Open zone valves by zone id. */
  valves: Record<number, OpenValve>;
  /** Open relays without a zone (master valves), by "controllerId:relay". */
  otherRelays: Record<string, OpenValve>;
  /** Manual starts waiting for supply or a free valve slot, in the server's order. */
  queue: QueuedStart[];
  commands: Record<string, PendingCommand>;
  /** Planned ends learned from the dispatcher before the valve event carried one (zone id → epoch ms). */
  plannedHints: Record<number, number>;
};

export const emptyLiveState = (): LiveState => ({
  sites: {}, controllers: {}, valves: {}, otherRelays: {}, queue: [], commands: {}, plannedHints: {},
});

const ms = (iso: string | null | undefined): number | null => {
  if (!iso) return null;
  const t = Date.parse(iso);
  return Number.isFinite(t) ? t : null;
};

function pushRecent(c: LiveController, p: RecentPoint) {
  c.recent.push(p);
  if (c.recent.length > RECENT_CAP) c.recent.splice(0, c.recent.length - RECENT_CAP);
}

/** Replace everything the server knows with the snapshot; keep our own commands' memory. */
export function applySnapshot(s: LiveState, snap: LiveSnapshot): void {
  s.sites = Object.fromEntries(snap.sites.map((x) => [x.id, { id: x.id, name: x.name, timezone: x.timezone }]));
  s.controllers = Object.fromEntries(
    snap.controllers.map((c) => [c.controllerId, { ...c, recent: c.recent.slice(-RECENT_CAP) }]),
  );
  const valves: LiveState['valves'] = {};
  const other: LiveState['otherRelays'] = {};
  for (const v of snap.openValves) {
    const open: OpenValve = {
      siteId: v.siteId, controllerId: v.controllerId, zoneId: v.zoneId, relay: v.relay,
      since: ms(v.since), plannedEnd: ms(v.plannedEnd) ?? (v.zoneId ? s.plannedHints[v.zoneId] ?? null : null), source: null,
    };
    if (v.zoneId !== null && !v.master) valves[v.zoneId] = open;
    else other[`${v.controllerId}:${v.relay}`] = open;
  }
  s.valves = valves;
  s.otherRelays = other;
  s.queue = [...snap.queued]
    .sort((a, b) => a.siteId - b.siteId || a.position - b.position)
    .map((q) => ({ siteId: q.siteId, zoneId: q.zoneId, controllerId: q.controllerId, commandId: q.commandId, seconds: q.seconds, origin: q.origin }));
  // Commands still waiting for a board may have finished while we were away: forget those the server no longer queues.
  const queuedIds = new Set(s.queue.map((q) => q.commandId));
  for (const [id, c] of Object.entries(s.commands)) {
    if (c.state === 'queued' && !queuedIds.has(id)) delete s.commands[id];
  }
  for (const z of Object.keys(s.plannedHints)) if (!valves[Number(z)]) delete s.plannedHints[Number(z)];
}

function onValve(s: LiveState, e: ValveLiveEvent) {
  const key = `${e.controllerId}:${e.relay}`;
  if (e.zoneId === null) {
    if (e.open) s.otherRelays[key] = { siteId: e.siteId, controllerId: e.controllerId, zoneId: null, relay: e.relay, since: ms(e.since) ?? ms(e.at), plannedEnd: ms(e.plannedEnd), source: e.source };
    else delete s.otherRelays[key];
    return;
  }
  if (!e.open) {
    delete s.valves[e.zoneId];
    delete s.plannedHints[e.zoneId];
    // The run is over: its start command no longer says anything about the row.
    for (const [id, c] of Object.entries(s.commands)) if (c.zoneId === e.zoneId && c.state === 'acked') delete s.commands[id];
    return;
  }
  const before = s.valves[e.zoneId];
  s.valves[e.zoneId] = {
    siteId: e.siteId, controllerId: e.controllerId, zoneId: e.zoneId, relay: e.relay,
    since: ms(e.since) ?? before?.since ?? ms(e.at),
    plannedEnd: ms(e.plannedEnd) ?? s.plannedHints[e.zoneId] ?? before?.plannedEnd ?? null,
    source: e.source,
  };
  // An open valve is no longer waiting in line.
  s.queue = s.queue.filter((q) => q.zoneId !== e.zoneId);
}

function onController(s: LiveState, e: ControllerLiveEvent) {
  const c = s.controllers[e.controllerId];
  if (!c) return;
  c.online = e.online;
  c.lastSeenAt = e.lastSeenAt;
}

function onReading(s: LiveState, e: ReadingLiveEvent) {
  const c = s.controllers[e.controllerId];
  if (!c) return;
  c.latest = { at: e.at, moisturePct: e.moisturePct, supplyV: e.supplyV, flowLpm: e.flowLpm, rssi: e.rssi, rain: e.rain };
  c.rain = e.rain;
  if (!c.lastSeenAt || (ms(c.lastSeenAt) ?? 0) < (ms(e.at) ?? 0)) c.lastSeenAt = e.at;
  pushRecent(c, { at: e.at, moisturePct: e.moisturePct, flowLpm: e.flowLpm, supplyV: e.supplyV });
}

function onRain(s: LiveState, e: RainLiveEvent) {
  const c = s.controllers[e.controllerId];
  if (c) c.rain = e.tripped;
}

function onCommand(s: LiveState, e: CommandLiveEvent, now: number) {
  const before = s.commands[e.commandId];
  const queued = s.queue.find((q) => q.commandId === e.commandId);
  s.commands[e.commandId] = {
    commandId: e.commandId, siteId: e.siteId, zoneId: e.zoneId, controllerId: e.controllerId,
    state: e.state, message: e.message ?? null, userId: e.userId ?? before?.userId ?? null,
    seconds: before?.seconds ?? queued?.seconds ?? null, updatedAt: now,
  };
  if (e.state === 'queued' && e.zoneId !== null && !queued) {
    s.queue.push({ siteId: e.siteId, zoneId: e.zoneId, controllerId: e.controllerId, commandId: e.commandId, seconds: before?.seconds ?? null, origin: 'manual' });
  } else if (e.state !== 'queued') {
    s.queue = s.queue.filter((q) => q.commandId !== e.commandId);
  }
  const seconds = s.commands[e.commandId].seconds;
  if (e.state === 'acked' && e.zoneId !== null && seconds) {
    // The dispatcher counts the run from the acknowledgement; this is our estimate until it says.
    s.plannedHints[e.zoneId] = now + seconds * 1000;
    const v = s.valves[e.zoneId];
    if (v) v.plannedEnd = s.plannedHints[e.zoneId];
  }
  pruneCommands(s, now);
}

/** Drop finished commands after a while so the map stays small. */
export function pruneCommands(s: LiveState, now: number): void {
  for (const [id, c] of Object.entries(s.commands)) {
    const finished = c.state === 'acked' || c.state === 'failed' || c.state === 'cancelled';
    if (finished && now - c.updatedAt > FINISHED_COMMAND_MS) delete s.commands[id];
  }
}

type Handler = (s: LiveState, f: never, now: number) => void;

const handlers: Record<string, Handler> = {
  snapshot: (s, f: LiveSnapshot) => applySnapshot(s, f),
  valve: (s, f: ValveLiveEvent) => onValve(s, f),
  controller: (s, f: ControllerLiveEvent) => onController(s, f),
  reading: (s, f: ReadingLiveEvent) => onReading(s, f),
  rain: (s, f: RainLiveEvent) => onRain(s, f),
  command: (s, f: CommandLiveEvent, now) => onCommand(s, f, now),
};

/** Apply one frame. Returns false for a kind this client does not handle yet (alerts, runs…): it is ignored. */
export function applyFrame(s: LiveState, f: LiveFrame, now = Date.now()): boolean {
  const h = Object.hasOwn(handlers, f.type) ? handlers[f.type] : undefined;
  if (!h) return false;
  h(s, f as never, now);
  return true;
}
