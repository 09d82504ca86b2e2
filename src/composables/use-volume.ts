import { formatNumber, useUnits } from './use-units';

/** US gallons in a litre's place: the API is metric only. */
const LITRES_PER_GALLON = 3.785411784;

/** Litres (and their basis word) in the user's units: L or gal. */
export function useVolume() {
  const units = useUnits();
  const unit = () => (units.system.value === 'us' ? 'gal' : 'L');
  const toShown = (litres: number) => (units.system.value === 'us' ? litres / LITRES_PER_GALLON : litres);
  return {
    unit,
    toShown,
    show: (litres: number | null | undefined) => (litres === null || litres === undefined ? '—' : `${formatNumber(toShown(litres))} ${unit()}`),
  };
}

/** How a litre figure was found, in words. */
export const basisWords: Record<string, string> = {
  measured: 'measured',
  estimated: 'estimated',
  mixed: 'partly measured',
  none: 'no water',
};
