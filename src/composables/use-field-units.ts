import { computed } from 'vue';
import { LITRES_PER_US_GALLON, METRES_PER_FOOT } from '../../server/domain/units';
import type { UnitSystem } from '../../server/domain/units';
import { formatNumber, forInput } from './use-units';
import { useSessionStore } from '../stores/session';

/**
 * Quantities the planning and weather screens need beyond server/domain/units.ts: a volume
 * of water (bucket, meter), air temperature, wind speed and pipe velocity. Same idea as
 * use-units: the API is metric, these convert for display and for input.
 */
export type FieldQuantity = 'volume' | 'temperature' | 'wind' | 'velocity';

const MPH_IN_MS = 1609.344 / 3600; // 1 mile = 1609.344 m, exact (NIST SP 811)

const table: Record<FieldQuantity, { metric: string; us: string; toUs: (v: number) => number; fromUs: (v: number) => number }> = {
  volume: { metric: 'L', us: 'gal', toUs: (l) => l / LITRES_PER_US_GALLON, fromUs: (g) => g * LITRES_PER_US_GALLON },
  temperature: { metric: '°C', us: '°F', toUs: (c) => (c * 9) / 5 + 32, fromUs: (f) => ((f - 32) * 5) / 9 },
  wind: { metric: 'm/s', us: 'mph', toUs: (ms) => ms / MPH_IN_MS, fromUs: (mph) => mph * MPH_IN_MS },
  velocity: { metric: 'm/s', us: 'ft/s', toUs: (ms) => ms / METRES_PER_FOOT, fromUs: (fts) => fts * METRES_PER_FOOT },
};

export const fieldUnit = (q: FieldQuantity, system: UnitSystem) => (system === 'us' ? table[q].us : table[q].metric);
export const fieldToShown = (metric: number, q: FieldQuantity, system: UnitSystem) => (system === 'us' ? table[q].toUs(metric) : metric);
export const fieldToMetric = (shown: number, q: FieldQuantity, system: UnitSystem) => (system === 'us' ? table[q].fromUs(shown) : shown);

export function useFieldUnits() {
  const session = useSessionStore();
  const system = computed<UnitSystem>(() => session.unitSystem);
  return {
    system,
    unit: (q: FieldQuantity) => fieldUnit(q, system.value),
    show: (metric: number | null | undefined, q: FieldQuantity) =>
      metric === null || metric === undefined ? '—' : `${formatNumber(fieldToShown(metric, q, system.value))} ${fieldUnit(q, system.value)}`,
    toInput: (metric: number, q: FieldQuantity) => forInput(fieldToShown(metric, q, system.value)),
    fromInput: (shown: number, q: FieldQuantity) => fieldToMetric(shown, q, system.value),
  };
}
