import { describe, expect, it } from 'vitest';
import { sampleSchema } from '../../../server/contracts/protocol';
import {
  FLOW,
  MOISTURE_CALIBRATION,
  SensorModel,
  moisturePctToRaw,
  moistureRawToPct,
  nominalFlowLpm,
  stepMoisture,
  type SensorInputs,
} from '../../../simulator/physics';
import { Rng } from '../../../simulator/prng';

const quiet: SensorInputs = { dtSeconds: 1, raining: false, watering: false, energisedCoils: 0, flowLpm: 0, lowVoltage: false };

function run(model: SensorModel, n: number, inputs: Partial<SensorInputs> = {}) {
  return Array.from({ length: n }, () => model.sample({ ...quiet, ...inputs }));
}

describe('moisture probe calibration', () => {
  it('maps 0 % to the dry-air reading and 100 % to the in-water reading', () => {
    expect(moisturePctToRaw(0)).toBe(MOISTURE_CALIBRATION.dryRaw);
    expect(moisturePctToRaw(100)).toBe(MOISTURE_CALIBRATION.wetRaw);
    expect(moistureRawToPct(MOISTURE_CALIBRATION.dryRaw)).toBe(0);
    expect(moistureRawToPct(MOISTURE_CALIBRATION.wetRaw)).toBe(100);
  });

  it('reads lower raw values as the soil gets wetter (a capacitive probe)', () => {
    expect(moisturePctToRaw(60)).toBeLessThan(moisturePctToRaw(30));
  });

  it('turns raw back into the percentage to within one ADC step', () => {
    const stepPct = 100 / (MOISTURE_CALIBRATION.dryRaw - MOISTURE_CALIBRATION.wetRaw);
    for (let pct = 0; pct <= 100; pct += 0.7) expect(Math.abs(moistureRawToPct(moisturePctToRaw(pct)) - pct)).toBeLessThanOrEqual(stepPct / 2 + 0.05);
  });

  it('clamps readings outside the calibrated range to 0–100 % and to 12 bits', () => {
    expect(moistureRawToPct(4095)).toBe(0);
    expect(moistureRawToPct(0)).toBe(100);
    expect(moisturePctToRaw(-20)).toBe(MOISTURE_CALIBRATION.dryRaw);
    expect(moisturePctToRaw(250)).toBe(MOISTURE_CALIBRATION.wetRaw);
  });
});

describe('moisture model', () => {
  it('rises while a zone waters', () => {
    expect(stepMoisture(30, 600, { watering: true, raining: false })).toBeGreaterThan(33);
  });

  it('rises while it rains, more slowly than under a running zone', () => {
    const rain = stepMoisture(30, 600, { watering: false, raining: true });
    expect(rain).toBeGreaterThan(30.5);
    expect(rain).toBeLessThan(stepMoisture(30, 600, { watering: true, raining: false }));
  });

  it('falls slowly with evaporation when nothing waters', () => {
    const after1h = stepMoisture(50, 3600, { watering: false, raining: false });
    expect(after1h).toBeLessThan(50);
    expect(after1h).toBeGreaterThan(49);
  });

  it('dries a wet soil faster than a dry one', () => {
    const wetLoss = 60 - stepMoisture(60, 3600, { watering: false, raining: false });
    const dryLoss = 15 - stepMoisture(15, 3600, { watering: false, raining: false });
    expect(wetLoss).toBeGreaterThan(dryLoss);
  });

  it('never leaves 0–100 % however long it waters', () => {
    let m = 90;
    for (let i = 0; i < 10_000; i++) m = stepMoisture(m, 60, { watering: true, raining: true });
    expect(m).toBeLessThanOrEqual(100);
    let d = 1;
    for (let i = 0; i < 10_000; i++) d = stepMoisture(d, 3600, { watering: false, raining: false });
    expect(d).toBeGreaterThanOrEqual(0);
  });
});

describe('flow through the zones', () => {
  const flows = { 1: 12, 2: 8.5, 3: 20 };

  it('sums the nominal flow of the open zone relays', () => {
    expect(nominalFlowLpm([1, 2], flows, null)).toBeCloseTo(20.5);
    expect(nominalFlowLpm([], flows, null)).toBe(0);
  });

  it('lets nothing flow while the master valve is closed, and does not count the master itself', () => {
    expect(nominalFlowLpm([1, 2], flows, 8)).toBe(0);
    expect(nominalFlowLpm([1, 2, 8], { ...flows, 8: 99 }, 8)).toBeCloseTo(20.5);
  });

  it('applies a per-relay fault factor', () => {
    expect(nominalFlowLpm([1, 3], flows, null, (r) => (r === 3 ? 2.5 : 1))).toBeCloseTo(62);
  });
});

describe('sensor model', () => {
  it('produces the same readings for the same seed and inputs', () => {
    expect(run(new SensorModel(new Rng(11)), 20, { watering: true, flowLpm: 14 })).toEqual(run(new SensorModel(new Rng(11)), 20, { watering: true, flowLpm: 14 }));
    expect(run(new SensorModel(new Rng(11)), 5)).not.toEqual(run(new SensorModel(new Rng(12)), 5));
  });

  it('produces readings that satisfy the protocol sample schema', () => {
    for (const r of run(new SensorModel(new Rng(3)), 200, { flowLpm: 30, energisedCoils: 2 }))
      expect(sampleSchema.safeParse({ at: '2025-06-02T06:00:00.000Z', ...r }).success).toBe(true);
  });

  it('reads flow within ±3 % of nominal while water moves, and a small floor when it does not', () => {
    const moving = run(new SensorModel(new Rng(4)), 500, { flowLpm: 40 }).map((r) => r.flowLpm!);
    expect(Math.min(...moving)).toBeGreaterThanOrEqual(40 * (1 - FLOW.noiseFraction) - 0.01);
    expect(Math.max(...moving)).toBeLessThanOrEqual(40 * (1 + FLOW.noiseFraction) + 0.01);
    expect(new Set(moving).size).toBeGreaterThan(50);
    const still = run(new SensorModel(new Rng(4)), 200, { flowLpm: 0 }).map((r) => r.flowLpm!);
    expect(Math.max(...still)).toBeLessThanOrEqual(FLOW.floorLpm);
    expect(Math.min(...still)).toBeGreaterThanOrEqual(0);
  });

  it('reports no flow value at all without a flow sensor', () => {
    expect(run(new SensorModel(new Rng(4)), 3, { flowLpm: null }).map((r) => r.flowLpm)).toEqual([null, null, null]);
  });

  it('reads a 24 VAC supply around 24–27 V, sagging with energised coils, and about 19 V under low_voltage', () => {
    const normal = run(new SensorModel(new Rng(8)), 300).map((r) => r.supplyV);
    expect(Math.min(...normal)).toBeGreaterThan(23.8);
    expect(Math.max(...normal)).toBeLessThan(27);
    const mean = (xs: number[]) => xs.reduce((a, b) => a + b, 0) / xs.length;
    const loaded = run(new SensorModel(new Rng(8)), 300, { energisedCoils: 3 }).map((r) => r.supplyV);
    expect(mean(loaded)).toBeLessThan(mean(normal) - 0.8);
    const low = run(new SensorModel(new Rng(8)), 300, { lowVoltage: true }).map((r) => r.supplyV);
    expect(mean(low)).toBeGreaterThan(18.5);
    expect(mean(low)).toBeLessThan(19.5);
  });

  it('keeps signal strength between -85 and -40 dBm, as whole numbers, with some movement', () => {
    const rssi = run(new SensorModel(new Rng(21)), 2000).map((r) => r.rssi);
    expect(Math.min(...rssi)).toBeGreaterThanOrEqual(-85);
    expect(Math.max(...rssi)).toBeLessThanOrEqual(-40);
    expect(rssi.every(Number.isInteger)).toBe(true);
    expect(new Set(rssi).size).toBeGreaterThan(5);
  });

  it('raises the reported moisture over a 10-minute run and lets it fall back afterwards', () => {
    const m = new SensorModel(new Rng(30));
    const start = m.moisturePct;
    run(m, 600, { watering: true });
    const wet = m.moisturePct;
    expect(wet).toBeGreaterThan(start + 3);
    run(m, 7200);
    expect(m.moisturePct).toBeLessThan(wet);
  });
});
