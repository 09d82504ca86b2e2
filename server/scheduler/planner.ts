/**
 * Packs a run's zone cycles into time slots. Pure: the same plan serves the 7-day timeline, the
 * litres-per-day estimate and the dispatcher's planned starts.
 *
 * Rules: items run in the program's order; a zone's next cycle waits for its soak; at most
 * `maxOpenPerController` valves per controller and, when the site allows parallel running, as
 * many zones as fit in the usable supply (a zone alone may exceed it — it is flagged elsewhere);
 * a site that does not allow parallel running opens one zone at a time.
 */
export type PlanZone = {
  zoneId: number;
  controllerId: number;
  flowLpm: number;
  /** Minutes of each cycle; one entry when there is no cycle and soak. */
  cycles: number[];
  soakMinutes: number;
};

export type PlanSlot = { zoneId: number; controllerId: number; cycle: number; startMs: number; endMs: number; flowLpm: number };

export type PlanInput = {
  startMs: number;
  zones: PlanZone[];
  parallel: boolean;
  usableSupplyLpm: number;
  maxOpenPerController: Map<number, number>;
  /** Slots already taken at the site (another program running), which this run must respect. */
  busy?: PlanSlot[];
};

export function planRun(p: PlanInput): PlanSlot[] {
  type Item = { z: PlanZone; cycle: number };
  const pending: Item[] = [];
  const maxCycles = Math.max(0, ...p.zones.map((z) => z.cycles.length));
  for (let c = 0; c < maxCycles; c++) for (const z of p.zones) if (z.cycles[c] !== undefined && z.cycles[c] > 0) pending.push({ z, cycle: c });
  const slots: PlanSlot[] = [];
  const busy = p.busy ?? [];
  const lastEnd = new Map<number, number>();
  const all = () => [...busy, ...slots];

  const fits = (item: Item, t: number, end: number) => {
    const overlapping = all().filter((s) => s.startMs < end && s.endMs > t);
    if (!p.parallel && overlapping.length > 0) return false;
    const cap = p.maxOpenPerController.get(item.z.controllerId) ?? 1;
    // check at every boundary inside [t, end) — the set of open slots only changes there
    const points = [t, ...overlapping.map((s) => s.startMs).filter((x) => x > t && x < end)];
    for (const x of points) {
      const open = all().filter((s) => s.startMs <= x && s.endMs > x);
      if (open.filter((s) => s.controllerId === item.z.controllerId).length >= cap) return false;
      const flow = open.reduce((a, s) => a + s.flowLpm, 0);
      if (open.length > 0 && flow + item.z.flowLpm > p.usableSupplyLpm + 1e-9) return false;
    }
    return true;
  };

  let cursor = p.startMs;
  for (const item of pending) {
    const dur = item.z.cycles[item.cycle] * 60_000;
    const release = item.cycle === 0 ? p.startMs : (lastEnd.get(item.z.zoneId) ?? p.startMs) + item.z.soakMinutes * 60_000;
    // sequential sites keep the program order; parallel sites may start an item as early as it fits
    let t = Math.max(release, p.parallel ? p.startMs : cursor);
    const candidates = () => [t, ...all().map((s) => s.endMs).filter((x) => x > t)].sort((a, b) => a - b);
    let placed = false;
    for (let guard = 0; guard < 10_000 && !placed; guard++) {
      for (const c of candidates()) {
        if (c < release) continue;
        if (fits(item, c, c + dur)) {
          t = c;
          placed = true;
          break;
        }
      }
      if (!placed) t = Math.max(...all().map((s) => s.endMs), t) + 1;
    }
    const slot: PlanSlot = { zoneId: item.z.zoneId, controllerId: item.z.controllerId, cycle: item.cycle, startMs: t, endMs: t + dur, flowLpm: item.z.flowLpm };
    slots.push(slot);
    lastEnd.set(item.z.zoneId, slot.endMs);
    if (!p.parallel) cursor = slot.endMs;
  }
  return slots.sort((a, b) => a.startMs - b.startMs || a.zoneId - b.zoneId);
}

/** Litres a slot plan would use: nominal flow × minutes. */
export function plannedLitres(slots: PlanSlot[]): number {
  return slots.reduce((a, s) => a + s.flowLpm * ((s.endMs - s.startMs) / 60_000), 0);
}

/** Highest total flow open at any moment of a plan (for checks and tests). */
export function peakFlow(slots: PlanSlot[]): number {
  let peak = 0;
  for (const s of slots) {
    const open = slots.filter((x) => x.startMs <= s.startMs && x.endMs > s.startMs);
    peak = Math.max(peak, open.reduce((a, x) => a + x.flowLpm, 0));
  }
  return peak;
}
