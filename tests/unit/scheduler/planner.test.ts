import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { peakFlow, planRun, plannedLitres, type PlanZone } from '../../../server/scheduler/planner';

const zone = (zoneId: number, controllerId: number, flowLpm: number, cycles: number[], soakMinutes = 0): PlanZone => ({ zoneId, controllerId, flowLpm, cycles, soakMinutes });
const T0 = Date.UTC(2026, 5, 1, 11, 0);
const min = (ms: number) => (ms - T0) / 60_000;

describe('run planner', () => {
  it('runs zones one after another in program order on a site without parallel running', () => {
    const slots = planRun({ startMs: T0, zones: [zone(1, 1, 20, [10]), zone(2, 1, 20, [5]), zone(3, 2, 20, [7])], parallel: false, usableSupplyLpm: 100, maxOpenPerController: new Map([[1, 3], [2, 3]]) });
    expect(slots.map((s) => [s.zoneId, min(s.startMs), min(s.endMs)])).toEqual([[1, 0, 10], [2, 10, 15], [3, 15, 22]]);
  });

  it('packs zones that fit the supply together when the site allows it, and queues the rest', () => {
    // usable 50 L/min: zones of 20 + 25 fit together, a third of 30 waits
    const slots = planRun({ startMs: T0, zones: [zone(1, 1, 20, [10]), zone(2, 1, 25, [10]), zone(3, 1, 30, [10])], parallel: true, usableSupplyLpm: 50, maxOpenPerController: new Map([[1, 3]]) });
    expect(slots.map((s) => [s.zoneId, min(s.startMs)])).toEqual([[1, 0], [2, 0], [3, 10]]);
    expect(peakFlow(slots)).toBeLessThanOrEqual(50);
  });

  it('never opens more valves on a controller than its cap', () => {
    const slots = planRun({ startMs: T0, zones: [1, 2, 3, 4].map((i) => zone(i, 9, 5, [10])), parallel: true, usableSupplyLpm: 1000, maxOpenPerController: new Map([[9, 2]]) });
    expect(slots.map((s) => min(s.startMs))).toEqual([0, 0, 10, 10]);
  });

  it('lets a single zone above the supply run alone', () => {
    const slots = planRun({ startMs: T0, zones: [zone(1, 1, 80, [10]), zone(2, 1, 10, [10])], parallel: true, usableSupplyLpm: 50, maxOpenPerController: new Map([[1, 4]]) });
    expect(slots.map((s) => [s.zoneId, min(s.startMs)])).toEqual([[1, 0], [2, 10]]);
  });

  it('waits out each zone’s soak before its next cycle, and the cycles add up to the planned minutes', () => {
    const slots = planRun({ startMs: T0, zones: [zone(1, 1, 20, [4, 4, 2], 15), zone(2, 1, 20, [6])], parallel: false, usableSupplyLpm: 100, maxOpenPerController: new Map([[1, 1]]) });
    const z1 = slots.filter((s) => s.zoneId === 1);
    for (let i = 1; i < z1.length; i++) expect(z1[i].startMs - z1[i - 1].endMs).toBeGreaterThanOrEqual(15 * 60_000);
    expect(z1.reduce((a, s) => a + (s.endMs - s.startMs) / 60_000, 0)).toBeCloseTo(10, 9);
    expect(plannedLitres(slots)).toBeCloseTo(20 * 10 + 20 * 6, 6);
  });

  it('keeps the open flow within the usable supply and each controller within its cap, for any site and program', () => {
    fc.assert(
      fc.property(
        fc.array(fc.record({ ctrl: fc.integer({ min: 1, max: 3 }), flow: fc.double({ min: 1, max: 40, noNaN: true }), mins: fc.array(fc.integer({ min: 1, max: 20 }), { minLength: 1, maxLength: 3 }), soak: fc.integer({ min: 0, max: 30 }) }), { minLength: 1, maxLength: 10 }),
        fc.double({ min: 40, max: 120, noNaN: true }),
        fc.array(fc.integer({ min: 1, max: 3 }), { minLength: 3, maxLength: 3 }),
        fc.boolean(),
        (zs, supply, caps, parallel) => {
          const zones = zs.map((z, i) => zone(i + 1, z.ctrl, z.flow, z.mins, z.soak));
          const capMap = new Map(caps.map((c, i) => [i + 1, c]));
          const slots = planRun({ startMs: T0, zones, parallel, usableSupplyLpm: supply, maxOpenPerController: capMap });
          // every planned cycle is placed exactly once
          expect(slots.length).toBe(zones.reduce((a, z) => a + z.cycles.length, 0));
          for (const s of slots) {
            const open = slots.filter((x) => x.startMs <= s.startMs && x.endMs > s.startMs);
            if (open.length > 1) expect(open.reduce((a, x) => a + x.flowLpm, 0)).toBeLessThanOrEqual(supply + 1e-6);
            if (!parallel) expect(open.length).toBe(1);
            expect(open.filter((x) => x.controllerId === s.controllerId).length).toBeLessThanOrEqual(capMap.get(s.controllerId)!);
          }
        },
      ),
      { numRuns: 300 },
    );
  });
});
