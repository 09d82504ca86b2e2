import type { MissCategory } from '../../types/history';

/** Why a run did not go as planned, in a few words. */
export const categoryWords: Record<MissCategory, { word: string; icon: string }> = {
  rain_hold: { word: 'Held for rain', icon: 'umbrella' },
  restriction: { word: 'Not allowed then', icon: 'block' },
  not_needed: { word: 'Soil still moist', icon: 'grass' },
  fault: { word: 'Failed', icon: 'error' },
  stopped: { word: 'Stopped', icon: 'back_hand' },
};
