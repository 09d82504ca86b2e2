import type { RunState, ZoneRunState } from '../../types/programs';

type Look = { word: string; icon: string; tone: 'plan' | 'run' | 'ok' | 'held' | 'skip' | 'bad' | 'off' };

/** Words and icons for run and zone-run states; each differs in word and icon, not only in colour. */
export const stateLooks: Record<RunState | ZoneRunState, Look> = {
  planned: { word: 'Coming up', icon: 'schedule', tone: 'plan' },
  running: { word: 'Watering', icon: 'water_drop', tone: 'run' },
  completed: { word: 'Done', icon: 'check_circle', tone: 'ok' },
  partial: { word: 'Partly done', icon: 'rule', tone: 'skip' },
  stopped: { word: 'Stopped by hand', icon: 'back_hand', tone: 'off' },
  held_rain: { word: 'Held for rain', icon: 'umbrella', tone: 'held' },
  skipped_restriction: { word: 'Not allowed then', icon: 'block', tone: 'skip' },
  skipped_not_needed: { word: 'Not needed', icon: 'grass', tone: 'skip' },
  failed: { word: 'Failed', icon: 'error', tone: 'bad' },
  cancelled: { word: 'Cancelled', icon: 'cancel', tone: 'off' },
};

export const lookOf = (s: string): Look => stateLooks[s as RunState] ?? { word: s, icon: 'help', tone: 'off' };

/** States that belong under "Skipped and why". */
export const SKIP_STATES = new Set<string>(['held_rain', 'skipped_restriction', 'skipped_not_needed', 'failed', 'cancelled']);

/** Program colours of our own: dark enough for white text, apart from each other in hue and lightness. */
const PALETTE = ['#1b4f63', '#8a4b2a', '#4a7c59', '#6a4c93', '#9a6a00', '#2f6690', '#7a2f4f', '#3b5f3b'];

export function programColour(programId: number, order: number[]): string {
  const i = order.indexOf(programId);
  return PALETTE[(i >= 0 ? i : programId) % PALETTE.length];
}
