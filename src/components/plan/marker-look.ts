import type { ZoneLiveState } from '../../stores/live';

/** How a zone shows on the site plan. Each look differs in icon, outline and word, not only in colour. */
export type MarkerKind = 'running' | 'starting' | 'closed' | 'offline';

export const markerLooks: Record<MarkerKind, { icon: string; word: string; explain: string }> = {
  running: { icon: 'water_drop', word: 'Running', explain: 'The valve is open and water is flowing' },
  starting: { icon: 'hourglass_top', word: 'Starting or waiting', explain: 'Asked to open or close; waiting for the board, or in line' },
  closed: { icon: 'radio_button_unchecked', word: 'Closed', explain: 'The valve is shut' },
  offline: { icon: 'wifi_off', word: 'Controller offline', explain: 'The board is not connected; its last state is not known' },
};

export function markerKind(st: ZoneLiveState, controllerOnline: boolean): MarkerKind {
  if (!controllerOnline) return 'offline';
  if (st.kind === 'open') return st.closing ? 'starting' : 'running';
  if (st.kind === 'opening' || st.kind === 'queued') return 'starting';
  return 'closed';
}
