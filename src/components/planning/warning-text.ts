import type { PlanningWarning } from '../../types/planning';

type Show = (metric: number | null | undefined, q: 'flow' | 'velocity') => string;

/**
 * A zone warning in the user's units. The server's message is metric; the code, value and
 * limit let the client say it in the units the user reads.
 */
export function warningText(w: PlanningWarning, show: Show): { title: string; detail: string } {
  switch (w.code) {
    case 'over_supply':
      return {
        title: 'Over the supply',
        detail: `Needs ${show(w.value, 'flow')}; the usable supply is ${show(w.limit, 'flow')}. Split the zone or use lower-flow heads.`,
      };
    case 'velocity_high':
      return {
        title: 'Fast water in the pipe',
        detail: `${show(w.value, 'velocity')} is above ${show(w.limit, 'velocity')}. A larger pipe or fewer heads keeps water hammer and wear down.`,
      };
    case 'mixed_spray_rotor':
      return { title: 'Sprays and rotors mixed', detail: 'Their precipitation rates differ about tenfold; give each its own zone.' };
    case 'mixed_head_types':
      return { title: 'Head types mixed', detail: 'Heads of different types apply water at different rates; keep them on separate zones.' };
    default:
      return { title: 'Check this zone', detail: (w as PlanningWarning).message };
  }
}
