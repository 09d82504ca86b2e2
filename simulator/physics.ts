import type { Sample } from '../server/contracts/protocol';
import type { Rng } from './prng';

/**
 * The physical world behind one board, kept simple and documented in docs/simulator.md.
 * Pure functions plus one small stateful model; no I/O and no clock of its own.
 */

const clamp = (x: number, lo: number, hi: number) => Math.min(hi, Math.max(lo, x));
const round = (x: number, digits: number) => Math.round(x * 10 ** digits) / 10 ** digits;

/**
 * Soil-moisture probe calibration (capacitive probe on a 12-bit ADC): the reading falls as the
 * soil gets wetter. Two points define the line: the probe in dry air reads DRY_RAW (0 %), the
 * probe in water reads WET_RAW (100 %).
 */
export const MOISTURE_CALIBRATION = { dryRaw: 3310, wetRaw: 1370 } as const;

export function moisturePctToRaw(pct: number): number {
  const { dryRaw, wetRaw } = MOISTURE_CALIBRATION;
  return clamp(Math.round(dryRaw - (clamp(pct, 0, 100) / 100) * (dryRaw - wetRaw)), 0, 4095);
}

/** The board's calibrated reading, to 0.1 %, clamped to 0–100. */
export function moistureRawToPct(raw: number): number {
  const { dryRaw, wetRaw } = MOISTURE_CALIBRATION;
  return clamp(round(((dryRaw - raw) / (dryRaw - wetRaw)) * 100, 1), 0, 100);
}

/**
 * Moisture change rates. Water going in is damped by how wet the soil already is (a wet soil
 * takes less); evaporation scales with moisture (a dry soil gives up less).
 */
export const MOISTURE_RATES = {
  /** Rise per minute while any zone on the board is watering, at 0 % moisture. */
  irrigationPctPerMin: 0.8,
  /** Rise per minute while the rain input is tripped, at 0 % moisture. */
  rainPctPerMin: 0.3,
  /** Fall per hour from evaporation at 50 % moisture. */
  evaporationPctPerHourAt50: 0.6,
} as const;

export function stepMoisture(pct: number, dtSeconds: number, inputs: { watering: boolean; raining: boolean }): number {
  const r = MOISTURE_RATES;
  const perMinIn = (inputs.watering ? r.irrigationPctPerMin : 0) + (inputs.raining ? r.rainPctPerMin : 0);
  const gain = (perMinIn / 60) * dtSeconds * (1 - pct / 100);
  const loss = (r.evaporationPctPerHourAt50 / 3600) * dtSeconds * (pct / 50);
  return clamp(pct + gain - loss, 0, 100);
}

/** Supply: a 24 VAC transformer read through a rectifier; each energised coil sags it a little. */
export const SUPPLY = { lowVoltageV: 19.0, sagPerCoilV: 0.35, noiseSigmaV: 0.12 } as const;

/** Flow sensor: ±3 % reading noise when water moves, a small floor when it does not. */
export const FLOW = { noiseFraction: 0.03, floorLpm: 0.05 } as const;

/** Signal strength range the board reports. */
export const RSSI = { best: -40, worst: -85 } as const;

/**
 * Nominal flow through the board's zones now: the sum over open zone relays of their flow times
 * any fault factor. With a master valve, nothing flows unless the master is open too; the master
 * relay itself carries no zone flow.
 */
export function nominalFlowLpm(
  openRelays: readonly number[],
  flows: Record<number, number>,
  masterValveRelay: number | null,
  factor: (relay: number) => number = () => 1,
): number {
  if (masterValveRelay != null && !openRelays.includes(masterValveRelay)) return 0;
  let sum = 0;
  for (const r of openRelays) if (r !== masterValveRelay) sum += (flows[r] ?? 0) * factor(r);
  return sum;
}

export type SensorInputs = {
  dtSeconds: number;
  raining: boolean;
  /** Water is reaching the soil (an open zone relay, and the master if there is one). */
  watering: boolean;
  energisedCoils: number;
  /** Nominal flow now, or null when the board has no flow sensor. */
  flowLpm: number | null;
  lowVoltage: boolean;
};

export type SensorReading = Omit<Sample, 'at'>;

/** The probe, transformer and radio of one board. Draws a fixed number of random numbers per sample. */
export class SensorModel {
  moisturePct: number;
  private readonly supplyBaseV: number;
  private readonly rssiBase: number;
  private rssiDrift = 0;

  constructor(private readonly rng: Rng) {
    this.moisturePct = rng.range(24, 42);
    this.supplyBaseV = rng.range(24.6, 26.4);
    this.rssiBase = rng.range(-76, -50);
  }

  sample(i: SensorInputs): SensorReading {
    const rng = this.rng;
    this.moisturePct = stepMoisture(this.moisturePct, i.dtSeconds, { watering: i.watering, raining: i.raining });
    const moistureRaw = moisturePctToRaw(this.moisturePct + rng.gauss(0.25));

    const supply = (i.lowVoltage ? SUPPLY.lowVoltageV : this.supplyBaseV) - SUPPLY.sagPerCoilV * i.energisedCoils + rng.gauss(SUPPLY.noiseSigmaV);

    const u = rng.float();
    let flowLpm: number | null = null;
    if (i.flowLpm !== null) {
      flowLpm = i.flowLpm > 0 ? i.flowLpm * (1 + FLOW.noiseFraction * (2 * u - 1)) : FLOW.floorLpm * u;
      flowLpm = round(Math.max(0, flowLpm), 2);
    }

    // A slow random walk pulled back towards the board's own level, plus per-reading jitter.
    this.rssiDrift = clamp(0.9 * this.rssiDrift + rng.gauss(1.2), -12, 12);
    const rssi = Math.round(clamp(this.rssiBase + this.rssiDrift + rng.gauss(1), RSSI.worst, RSSI.best));

    return {
      rain: i.raining,
      moistureRaw,
      moisturePct: moistureRawToPct(moistureRaw),
      supplyV: round(clamp(supply, 0, 60), 2),
      flowLpm,
      rssi,
    };
  }
}
