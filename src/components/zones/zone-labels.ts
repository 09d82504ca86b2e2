import { headTypes, plantTypes, soilTextures } from '../../../server/contracts/zones';
import type { Zone } from '../../types/api';

export const plantLabels: Record<Zone['plantType'], string> = {
  cool_season_turf: 'Cool-season turf',
  warm_season_turf: 'Warm-season turf',
  shrubs: 'Shrubs',
  trees: 'Trees',
  groundcover: 'Groundcover',
  vegetables: 'Vegetables',
};

export const soilLabels: Record<Zone['soilTexture'], string> = {
  sand: 'Sand',
  loamy_sand: 'Loamy sand',
  sandy_loam: 'Sandy loam',
  loam: 'Loam',
  silt_loam: 'Silt loam',
  clay_loam: 'Clay loam',
  clay: 'Clay',
};

export const headLabels: Record<Zone['headType'], string> = {
  spray: 'Spray',
  rotor: 'Rotor',
  drip: 'Drip',
  bubbler: 'Bubbler',
};

/** The zone's head type, with another found on the same valve: "Rotor + spray". */
export function headsLabel(z: Pick<Zone, 'headType' | 'otherHeadType'>): string {
  const main = headLabels[z.headType];
  return z.otherHeadType ? `${main} + ${headLabels[z.otherHeadType].toLowerCase()}` : main;
}

const opts = <K extends string>(keys: readonly K[], labels: Record<K, string>) => keys.map((value) => ({ value, label: labels[value] }));

export const plantOptions = opts(plantTypes, plantLabels);
export const soilOptions = opts(soilTextures, soilLabels);
export const headOptions = opts(headTypes, headLabels);
