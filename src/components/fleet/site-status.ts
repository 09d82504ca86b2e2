import type { SiteSummary } from '../../types/api';

/** Colour and words for a site's controllers: all online, some, none. */
export function controllerState(s: Pick<SiteSummary, 'controllerCount' | 'onlineControllers'>) {
  if (s.controllerCount === 0) return { color: 'grey-6', text: 'No controllers' };
  if (s.onlineControllers === s.controllerCount) return { color: 'positive', text: 'All online' };
  if (s.onlineControllers === 0) return { color: 'negative', text: 'All offline' };
  return { color: 'warning', text: 'Some offline' };
}
