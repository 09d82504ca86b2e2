/**
 * Metric ↔ US customary conversions for the client's unit switch. Values are stored and
 * computed in metric (L/min, mm, m², kPa, m, mm/h); these functions convert for display
 * and back for input. Definitions: NIST SP 811 (2008), Appendix B.
 */
import { requireFinite, requireOneOf } from './errors';

/** 1 US gallon = 231 in³ = 3.785 411 784 L, exactly (NIST SP 811, B.8). */
export const LITRES_PER_US_GALLON = 3.785411784;
/** 1 in = 25.4 mm, exactly. */
export const MM_PER_INCH = 25.4;
/** 1 ft = 0.3048 m, exactly. */
export const METRES_PER_FOOT = 0.3048;
/** 1 ft² = 0.092 903 04 m², exactly. */
export const SQUARE_METRES_PER_SQUARE_FOOT = METRES_PER_FOOT * METRES_PER_FOOT;
/**
 * 1 psi = 1 lbf/in² = 4.448 221 615 260 5 N / (0.0254 m)² = 6.894 757 293… kPa
 * (NIST SP 811 prints 6.894 757 E+00 kPa).
 */
export const KPA_PER_PSI = 4.4482216152605 / (0.0254 * 0.0254) / 1000;

export const lpmToGpm = (lpm: number): number => requireFinite('value', lpm) / LITRES_PER_US_GALLON;
export const gpmToLpm = (gpm: number): number => requireFinite('value', gpm) * LITRES_PER_US_GALLON;
export const mmToIn = (mm: number): number => requireFinite('value', mm) / MM_PER_INCH;
export const inToMm = (inches: number): number => requireFinite('value', inches) * MM_PER_INCH;
export const m2ToFt2 = (m2: number): number => requireFinite('value', m2) / SQUARE_METRES_PER_SQUARE_FOOT;
export const ft2ToM2 = (ft2: number): number => requireFinite('value', ft2) * SQUARE_METRES_PER_SQUARE_FOOT;
export const kPaToPsi = (kPa: number): number => requireFinite('value', kPa) / KPA_PER_PSI;
export const psiToKPa = (psi: number): number => requireFinite('value', psi) * KPA_PER_PSI;
export const mToFt = (m: number): number => requireFinite('value', m) / METRES_PER_FOOT;
export const ftToM = (ft: number): number => requireFinite('value', ft) * METRES_PER_FOOT;
/** mm/h → in/h. */
export const mmhToInh = (mmh: number): number => requireFinite('value', mmh) / MM_PER_INCH;
/** in/h → mm/h. */
export const inhToMmh = (inh: number): number => requireFinite('value', inh) * MM_PER_INCH;

export const QUANTITIES = ['flow', 'depth', 'area', 'pressure', 'length', 'rate'] as const;
export type Quantity = (typeof QUANTITIES)[number];
export const UNIT_SYSTEMS = ['metric', 'us'] as const;
export type UnitSystem = (typeof UNIT_SYSTEMS)[number];

export type MetricUnit = 'L/min' | 'mm' | 'm²' | 'kPa' | 'm' | 'mm/h';
export type UsUnit = 'gal/min' | 'in' | 'ft²' | 'psi' | 'ft' | 'in/h';
export type Unit = MetricUnit | UsUnit;

interface QuantityDef {
  metric: MetricUnit;
  us: UsUnit;
  toUs: (v: number) => number;
  toMetric: (v: number) => number;
}

const DEFS: Readonly<Record<Quantity, QuantityDef>> = {
  flow: { metric: 'L/min', us: 'gal/min', toUs: lpmToGpm, toMetric: gpmToLpm },
  depth: { metric: 'mm', us: 'in', toUs: mmToIn, toMetric: inToMm },
  area: { metric: 'm²', us: 'ft²', toUs: m2ToFt2, toMetric: ft2ToM2 },
  pressure: { metric: 'kPa', us: 'psi', toUs: kPaToPsi, toMetric: psiToKPa },
  length: { metric: 'm', us: 'ft', toUs: mToFt, toMetric: ftToM },
  rate: { metric: 'mm/h', us: 'in/h', toUs: mmhToInh, toMetric: inhToMmh },
};

/** Unit label of a quantity in a unit system. */
export function unitOf(quantity: Quantity, system: UnitSystem): Unit {
  const q = requireOneOf('quantity', quantity, QUANTITIES);
  const s = requireOneOf('system', system, UNIT_SYSTEMS);
  return DEFS[q][s];
}

/** A metric value shown in the chosen system: { value, unit }. */
export function convert(value: number, quantity: Quantity, system: UnitSystem): { value: number; unit: Unit } {
  const v = requireFinite('value', value);
  const q = requireOneOf('quantity', quantity, QUANTITIES);
  const s = requireOneOf('system', system, UNIT_SYSTEMS);
  const def = DEFS[q];
  return s === 'metric' ? { value: v, unit: def.metric } : { value: def.toUs(v), unit: def.us };
}

/** A value entered in the chosen system, back to the metric value the library works in. */
export function toMetric(value: number, quantity: Quantity, system: UnitSystem): number {
  const v = requireFinite('value', value);
  const q = requireOneOf('quantity', quantity, QUANTITIES);
  const s = requireOneOf('system', system, UNIT_SYSTEMS);
  return s === 'metric' ? v : DEFS[q].toMetric(v);
}

