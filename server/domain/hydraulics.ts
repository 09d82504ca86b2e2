/**
 * Supply, zone and pipe hydraulics for landscape irrigation. Pure functions, SI units at the
 * interface (L/min, mm, m, m², mm/h, m/s). See docs/computations.md for sources. No function
 * returns a non-finite number: inputs too extreme to compute with raise DomainInputError.
 */
import {
  DomainInputError,
  requireInRange,
  requireInteger,
  requireNonNegative,
  requireFiniteResult,
  requireOneOf,
  requirePositive,
} from './errors';

export const HEAD_TYPES = ['spray', 'rotor', 'drip', 'bubbler'] as const;
export type HeadType = (typeof HEAD_TYPES)[number];

/** kPa per metre of water head (standard gravity 9.80665 m/s² × 1000 kg/m³). */
export const KPA_PER_METRE_HEAD = 9.80665;
/** Velocity above which a warning is raised, m/s (≈ 5 ft/s, Boman, UF/IFAS). */
export const MAX_PIPE_VELOCITY_MS = 1.5;

/** Relative tolerance used to absorb floating-point error (e.g. 30 / 2 must give 15). */
const REL_EPS = 1e-9;

function checkMargin(marginPct: unknown): number {
  return requireInRange('marginPct', marginPct, 0, 100, { maxExclusive: true, unit: '%' });
}

/** Supply flow from a bucket test, L/min: 60 × volume / seconds. */
export function bucketTestFlow(volumeL: number, seconds: number): number {
  requirePositive('volumeL', volumeL);
  requirePositive('seconds', seconds);
  return requireFiniteResult((60 * volumeL) / seconds, [
    ['volumeL', volumeL, 1],
    ['seconds', seconds, -1],
  ]);
}

/** Supply left for a zone after the safety margin, L/min: supply × (1 − margin/100). */
export function usableSupply(supplyLpm: number, marginPct = 0): number {
  requireNonNegative('supplyLpm', supplyLpm);
  checkMargin(marginPct);
  return supplyLpm * (1 - marginPct / 100);
}

/** Whole heads that can run at once: floor(supply × (1 − margin/100) / head flow). */
export function maxHeadsPerZone(supplyLpm: number, headLpm: number, marginPct = 0): number {
  requirePositive('headLpm', headLpm);
  const usable = usableSupply(supplyLpm, marginPct);
  const ratio = usable / headLpm;
  return requireFiniteResult(Math.floor(ratio + REL_EPS * Math.max(1, ratio)), [
    ['supplyLpm', supplyLpm, 1],
    ['headLpm', headLpm, -1],
  ]);
}

/** Flow of a zone, L/min: head count × flow per head. */
export function zoneFlow(headCount: number, flowPerHeadLpm: number): number {
  requireInteger('headCount', headCount, 0);
  requireNonNegative('flowPerHeadLpm', flowPerHeadLpm);
  return requireFiniteResult(headCount * flowPerHeadLpm, [
    ['headCount', headCount, 1],
    ['flowPerHeadLpm', flowPerHeadLpm, 1],
  ]);
}

/** Precipitation rate, mm/h: 60 × flow (L/min) / area (m²). */
export function precipitationRate(flowLpm: number, areaM2: number): number {
  requireNonNegative('flowLpm', flowLpm);
  requirePositive('areaM2', areaM2);
  return requireFiniteResult((60 * flowLpm) / areaM2, [
    ['flowLpm', flowLpm, 1],
    ['areaM2', areaM2, -1],
  ]);
}

/**
 * Ground area watered by one head at the given head spacing S, m².
 * Square: S × S. Triangular (equilateral): S × 0.866 S (row spacing L = √3/2 · S).
 */
export function areaPerHead(spacingM: number, pattern: 'square' | 'triangular' = 'square'): number {
  requirePositive('spacingM', spacingM);
  requireOneOf('pattern', pattern, ['square', 'triangular'] as const);
  const area = pattern === 'square' ? spacingM * spacingM : spacingM * spacingM * (Math.sqrt(3) / 2);
  return requireFiniteResult(area, [['spacingM', spacingM, 2]]);
}

/**
 * Hazen–Williams friction loss, metres of head.
 * SI form hf = 10.67 L Q^1.852 / (C^1.852 D^4.87), Q in m³/s, D and L in m. No flow or no
 * length loses nothing (0), whatever the bore.
 */
export function hazenWilliamsLoss(flowLpm: number, innerDiameterMm: number, lengthM: number, c = 150): number {
  requireNonNegative('flowLpm', flowLpm);
  requirePositive('innerDiameterMm', innerDiameterMm);
  requireNonNegative('lengthM', lengthM);
  requirePositive('c', c);
  if (flowLpm === 0 || lengthM === 0) return 0;
  const q = flowLpm / 60_000;
  const d = innerDiameterMm / 1000;
  const loss = (10.67 * lengthM * Math.pow(q, 1.852)) / (Math.pow(c, 1.852) * Math.pow(d, 4.87));
  return requireFiniteResult(loss, [
    ['flowLpm', flowLpm, 1.852],
    ['innerDiameterMm', innerDiameterMm, -4.87],
    ['lengthM', lengthM, 1],
    ['c', c, -1.852],
  ]);
}

/** Mean water velocity in a full pipe, m/s: Q / (π D² / 4). */
export function pipeVelocity(flowLpm: number, innerDiameterMm: number): number {
  requireNonNegative('flowLpm', flowLpm);
  requirePositive('innerDiameterMm', innerDiameterMm);
  if (flowLpm === 0) return 0;
  const q = flowLpm / 60_000;
  const d = innerDiameterMm / 1000;
  return requireFiniteResult(q / ((Math.PI * d * d) / 4), [
    ['flowLpm', flowLpm, 1],
    ['innerDiameterMm', innerDiameterMm, -2],
  ]);
}

/** Metres of water head → kPa (9.80665 kPa per metre). */
export function headLossKPa(headM: number): number {
  requireNonNegative('headM', headM);
  return requireFiniteResult(headM * KPA_PER_METRE_HEAD, [['headM', headM, 1]]);
}

/** Minutes to apply a net depth: depth / efficiency / PR × 60. */
export function runMinutes(depthMm: number, precipitationRateMmH: number, efficiency = 1): number {
  requireNonNegative('depthMm', depthMm);
  requirePositive('precipitationRateMmH', precipitationRateMmH);
  requireInRange('efficiency', efficiency, 0, 1, { minExclusive: true });
  return requireFiniteResult(((depthMm / efficiency) / precipitationRateMmH) * 60, [
    ['depthMm', depthMm, 1],
    ['efficiency', efficiency, -1],
    ['precipitationRateMmH', precipitationRateMmH, -1],
  ]);
}

// ---------------------------------------------------------------------------------------
// Grouping heads into zones

export interface PlannedHead {
  id: string;
  flowLpm: number;
  headType: HeadType;
}

export interface ProposedZone {
  headType: HeadType;
  headIds: string[];
  flowLpm: number;
}

/**
 * Propose zones for a list of heads. Heads are grouped by type (a zone never mixes types),
 * then packed first-fit-decreasing: heads sorted by flow, largest first (ties keep input
 * order), each placed in the first zone of its type that still has room within the usable
 * supply, otherwise in a new zone. Zones come out ordered by head type (HEAD_TYPES order),
 * then by creation. A head whose own flow exceeds the usable supply is an input error.
 */
export function groupHeadsIntoZones(heads: PlannedHead[], supplyLpm: number, marginPct = 0): ProposedZone[] {
  if (!Array.isArray(heads)) throw new DomainInputError('heads', 'heads must be an array');
  const usable = usableSupply(supplyLpm, marginPct);
  // Capped so that a zone's summed flow can never reach Infinity and still "fit".
  const limit = Math.min(usable * (1 + REL_EPS), Number.MAX_VALUE);
  const seen = new Set<string>();
  heads.forEach((h, i) => {
    if (h === null || typeof h !== 'object') throw new DomainInputError(`heads[${i}]`, `heads[${i}] must be an object`);
    if (typeof h.id !== 'string' || h.id.length === 0) {
      throw new DomainInputError(`heads[${i}].id`, `heads[${i}].id must be a non-empty string`);
    }
    if (seen.has(h.id)) throw new DomainInputError(`heads[${i}].id`, `heads[${i}].id "${h.id}" appears more than once`);
    seen.add(h.id);
    requirePositive(`heads[${i}].flowLpm`, h.flowLpm);
    requireOneOf(`heads[${i}].headType`, h.headType, HEAD_TYPES);
    if (h.flowLpm > limit) {
      throw new DomainInputError(
        `heads[${i}].flowLpm`,
        `heads[${i}].flowLpm ${h.flowLpm} L/min exceeds the usable supply of ${usable} L/min`,
      );
    }
  });

  const zones: ProposedZone[] = [];
  for (const type of HEAD_TYPES) {
    const ofType = heads
      .map((h, index) => ({ h, index }))
      .filter(({ h }) => h.headType === type)
      .sort((a, b) => b.h.flowLpm - a.h.flowLpm || a.index - b.index);
    const typeZones: ProposedZone[] = [];
    for (const { h } of ofType) {
      let target = typeZones.find((z) => z.flowLpm + h.flowLpm <= limit);
      if (!target) {
        target = { headType: type, headIds: [], flowLpm: 0 };
        typeZones.push(target);
      }
      target.headIds.push(h.id);
      target.flowLpm += h.flowLpm;
    }
    zones.push(...typeZones);
  }
  return zones;
}

// ---------------------------------------------------------------------------------------
// Cycle and soak

export interface CycleAndSoakInput {
  /** Total run time to split, minutes. */
  totalMinutes: number;
  /** Zone precipitation rate, mm/h. */
  precipitationRateMmH: number;
  /** Soil basic intake rate, mm/h. */
  intakeRateMmH: number;
  /** Largest number of cycles allowed (default: no limit). */
  maxCycles?: number;
  /** Shortest soak between cycles, minutes (default 0). */
  minSoakMinutes?: number;
  /** Shortest cycle worth opening a valve for, minutes (default 1). Common practice. */
  minCycleMinutes?: number;
  /** Water the surface holds before it runs off, mm (default 2.5). Common practice. */
  surfaceStorageMm?: number;
}

export interface CycleAndSoakResult {
  /** Minutes of each cycle, summing to totalMinutes. */
  cycles: number[];
  /** Soak time between consecutive cycles, minutes (0 for a single cycle). */
  soakMinutes: number;
  /** Longest cycle the soil takes without runoff, minutes; null when PR ≤ intake rate. */
  cycleLimitMinutes: number | null;
  /** True when cycles run longer than cycleLimitMinutes (forced by maxCycles or minCycleMinutes). */
  runoffExpected: boolean;
}

export const DEFAULT_SURFACE_STORAGE_MM = 2.5;
export const DEFAULT_MIN_CYCLE_MINUTES = 1;
/**
 * Most cycles one split may give. A guard against absurd input, not a rule of the trade: a
 * whole day holds 1,440 one-minute cycles.
 */
export const MAX_SPLIT_CYCLES = 10_000;

/**
 * Split a run into cycles with soak time between them.
 *
 * Rule (common practice, see docs/computations.md): while a zone runs, the soil takes in
 * water at its intake rate IR and the rest, (PR − IR) × t, ponds on the surface. A cycle may
 * last until the ponded water reaches the surface storage S: t_max = 60 · S / (PR − IR)
 * minutes, so the depth applied per cycle, PR · t / 60, never exceeds what the soil absorbs
 * during the cycle plus what the surface holds until the soak absorbs it. The soak lasts
 * until the ponded water has soaked in: soak = 60 · ponded / IR. When PR ≤ IR the run is
 * one cycle. Cycles are equal, in hundredths of a minute, the last carrying any remainder.
 */
export function cycleAndSoak(input: CycleAndSoakInput): CycleAndSoakResult {
  if (input === null || typeof input !== 'object') throw new DomainInputError('input', 'cycleAndSoak needs an object');
  const total = requireNonNegative('totalMinutes', input.totalMinutes);
  const pr = requirePositive('precipitationRateMmH', input.precipitationRateMmH);
  const ir = requirePositive('intakeRateMmH', input.intakeRateMmH);
  const maxCycles = input.maxCycles === undefined ? Infinity : requireInteger('maxCycles', input.maxCycles, 1);
  const minSoak = input.minSoakMinutes === undefined ? 0 : requireNonNegative('minSoakMinutes', input.minSoakMinutes);
  const minCycle =
    input.minCycleMinutes === undefined
      ? DEFAULT_MIN_CYCLE_MINUTES
      : requirePositive('minCycleMinutes', input.minCycleMinutes);
  const storage =
    input.surfaceStorageMm === undefined
      ? DEFAULT_SURFACE_STORAGE_MM
      : requirePositive('surfaceStorageMm', input.surfaceStorageMm);

  const cycleLimit =
    pr > ir
      ? requireFiniteResult((60 * storage) / (pr - ir), [
          ['surfaceStorageMm', storage, 1],
          ['precipitationRateMmH', pr, -1],
        ])
      : null;
  if (total === 0) return { cycles: [], soakMinutes: 0, cycleLimitMinutes: cycleLimit, runoffExpected: false };
  if (cycleLimit === null) return { cycles: [total], soakMinutes: 0, cycleLimitMinutes: null, runoffExpected: false };

  const cap = Math.max(cycleLimit, minCycle);
  // Work in hundredths of a minute; keep each cycle at or below the cap after rounding.
  const totalH = Math.round(total * 100);
  if (!Number.isSafeInteger(totalH)) {
    throw new DomainInputError('totalMinutes', `totalMinutes (${total}) is too long to split into cycles`);
  }
  const capH = Math.max(1, Math.floor(cap * 100 - 0.5));
  let n = total <= cap ? 1 : Math.ceil(totalH / capH);
  if (n > maxCycles) n = maxCycles;
  if (n > totalH) n = Math.max(1, totalH);
  if (n > MAX_SPLIT_CYCLES) {
    throw new DomainInputError(
      'totalMinutes',
      `totalMinutes (${total}) would need ${n} cycles of at most ${round(cap, 2)} min; at most ${MAX_SPLIT_CYCLES} are planned`,
    );
  }

  let cycles: number[];
  if (n === 1) {
    cycles = [total];
  } else {
    const base = Math.floor(totalH / n);
    const extra = totalH - base * n;
    // The longer cycles (base + 1 hundredths) go first; the last cycle absorbs the
    // sub-hundredth remainder so the cycles add up to totalMinutes.
    cycles = Array.from({ length: n }, (_, i) => (base + (i < extra ? 1 : 0)) / 100);
    const sumOthers = cycles.slice(0, -1).reduce((a, b) => a + b, 0);
    cycles[n - 1] = total - sumOthers;
  }

  const longest = Math.max(...cycles);
  const runoffExpected = longest > cycleLimit * (1 + 1e-9);
  let soakMinutes = 0;
  if (cycles.length > 1) {
    const pondedMm = Math.min(((pr - ir) * longest) / 60, storage);
    soakMinutes = Math.max(minSoak, Math.ceil(((60 * pondedMm) / ir) * 100 - 1e-6) / 100);
    requireFiniteResult(soakMinutes, [
      ['intakeRateMmH', ir, -1],
      ['surfaceStorageMm', storage, 1],
    ]);
  }
  return { cycles, soakMinutes, cycleLimitMinutes: cycleLimit, runoffExpected };
}

// ---------------------------------------------------------------------------------------
// Zone warnings

export type ZoneWarningCode = 'over_supply' | 'velocity_high' | 'mixed_spray_rotor' | 'mixed_head_types';

export interface ZoneWarning {
  code: ZoneWarningCode;
  message: string;
  /** The value that triggered the warning (L/min, m/s), when numeric. */
  value?: number;
  /** The limit it was compared with. */
  limit?: number;
}

export interface ZoneWarningInput {
  /** Zone flow, L/min. */
  flowLpm: number;
  /** Head types present on the zone (duplicates allowed). */
  headTypes?: HeadType[];
  /** Site supply, L/min; omit to skip the supply check. */
  supplyLpm?: number;
  marginPct?: number;
  /** Inner diameter of the zone's supply pipe, mm; omit to skip the velocity check. */
  innerDiameterMm?: number;
  /** Velocity limit, m/s (default 1.5). */
  maxVelocityMs?: number;
}

/** Warnings for a planned zone: over the usable supply, pipe velocity too high, mixed heads. */
export function zoneWarnings(zone: ZoneWarningInput): ZoneWarning[] {
  if (zone === null || typeof zone !== 'object') throw new DomainInputError('zone', 'zoneWarnings needs an object');
  const flow = requireNonNegative('flowLpm', zone.flowLpm);
  const warnings: ZoneWarning[] = [];

  if (zone.supplyLpm !== undefined) {
    const usable = usableSupply(zone.supplyLpm, zone.marginPct ?? 0);
    if (flow > usable * (1 + REL_EPS)) {
      warnings.push({
        code: 'over_supply',
        message: `Zone flow ${round(flow, 2)} L/min exceeds the usable supply of ${round(usable, 2)} L/min`,
        value: flow,
        limit: usable,
      });
    }
  }

  if (zone.innerDiameterMm !== undefined) {
    const limit =
      zone.maxVelocityMs === undefined ? MAX_PIPE_VELOCITY_MS : requirePositive('maxVelocityMs', zone.maxVelocityMs);
    const v = pipeVelocity(flow, zone.innerDiameterMm);
    if (v > limit) {
      warnings.push({
        code: 'velocity_high',
        message: `Pipe velocity ${round(v, 2)} m/s is above ${limit} m/s`,
        value: v,
        limit,
      });
    }
  }

  if (zone.headTypes !== undefined) {
    if (!Array.isArray(zone.headTypes)) throw new DomainInputError('headTypes', 'headTypes must be an array');
    zone.headTypes.forEach((t, i) => requireOneOf(`headTypes[${i}]`, t, HEAD_TYPES));
    const types = new Set(zone.headTypes);
    if (types.has('spray') && types.has('rotor')) {
      warnings.push({
        code: 'mixed_spray_rotor',
        message: 'Sprays and rotors share this zone; their precipitation rates differ too much to run together',
      });
    } else if (types.size > 1) {
      warnings.push({
        code: 'mixed_head_types',
        message: `This zone mixes head types (${[...types].join(', ')})`,
      });
    }
  }
  return warnings;
}

function round(x: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}
