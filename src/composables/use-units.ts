import { computed } from 'vue';
import { convert, inToMm, mmToIn, toMetric, unitOf, type Quantity, type UnitSystem } from '../../server/domain/units';
import { useSessionStore } from '../stores/session';

/**
 * Quantities the client shows. The API is metric only; these convert for display and back
 * for input. `rootDepth` is stored in metres and shown in m (metric) or inches (US).
 */
export type ShownQuantity = Quantity | 'rootDepth';

export function unitLabel(q: ShownQuantity, system: UnitSystem): string {
  if (q === 'rootDepth') return system === 'us' ? 'in' : 'm';
  return unitOf(q, system);
}

export function metricToShown(value: number, q: ShownQuantity, system: UnitSystem): number {
  if (q === 'rootDepth') return system === 'us' ? mmToIn(value * 1000) : value;
  return convert(value, q, system).value;
}

export function shownToMetric(value: number, q: ShownQuantity, system: UnitSystem): number {
  if (q === 'rootDepth') return system === 'us' ? inToMm(value) / 1000 : value;
  return toMetric(value, q, system);
}

/** Fewer decimals for big numbers, three significant digits for small ones. */
export function formatNumber(v: number): string {
  const a = Math.abs(v);
  if (a === 0) return '0';
  if (a >= 100) return v.toLocaleString(undefined, { maximumFractionDigits: 0 });
  if (a >= 10) return v.toLocaleString(undefined, { maximumFractionDigits: 1 });
  if (a >= 1) return v.toLocaleString(undefined, { maximumFractionDigits: 2 });
  return v.toLocaleString(undefined, { maximumSignificantDigits: 3 });
}

/** Rounded to 4 significant digits: what an input field shows. */
export function forInput(v: number): number {
  if (v === 0 || !Number.isFinite(v)) return v;
  return Number(v.toPrecision(4));
}

/** The signed-in user's unit system, and helpers that follow it. */
export function useUnits() {
  const session = useSessionStore();
  const system = computed<UnitSystem>(() => session.unitSystem);
  return {
    system,
    unit: (q: ShownQuantity) => unitLabel(q, system.value),
    /** A metric value as text in the user's units, e.g. "16 gal/min". */
    show: (metric: number | null | undefined, q: ShownQuantity) =>
      metric === null || metric === undefined ? '—' : `${formatNumber(metricToShown(metric, q, system.value))} ${unitLabel(q, system.value)}`,
    /** A metric value for an input field in the user's units. */
    toInput: (metric: number, q: ShownQuantity) => forInput(metricToShown(metric, q, system.value)),
    /** A value typed in the user's units, back to metric for the API. */
    fromInput: (shown: number, q: ShownQuantity) => shownToMetric(shown, q, system.value),
  };
}
