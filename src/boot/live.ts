import { watch } from 'vue';
import { Notify } from 'quasar';
import { useLiveStore } from '../stores/live';
import { useSessionStore } from '../stores/session';
import { useSitesStore } from '../stores/sites';
import type { CommandLiveEvent } from '../types/live';
import type { BootContext } from './context';

/**
 * The live socket runs while someone is signed in, and stops (forgetting what it held) at
 * sign-out. What the boards say about the user's own commands is told to them wherever they are.
 */
export function install({ pinia }: BootContext): void {
  const session = useSessionStore(pinia);
  const sites = useSitesStore(pinia);
  const live = useLiveStore(pinia);

  watch(
    () => session.me?.id ?? null,
    (id, before) => {
      if (id === before) return;
      live.stop();
      if (id !== null) live.start();
    },
    { immediate: true },
  );

  const zoneName = (e: CommandLiveEvent) =>
    live.labelOf(e.commandId) ?? sites.current?.zones.find((z) => z.id === e.zoneId)?.name ?? 'The zone';

  live.onCommand((e) => {
    if (!session.me || e.userId !== session.me.id) return;
    const name = zoneName(e);
    if (e.state === 'acked') {
      Notify.create({ type: 'positive', icon: 'water_drop', message: `${name} is open`, caption: 'The board confirmed the start.' });
    } else if (e.state === 'failed') {
      Notify.create({
        type: 'negative', icon: 'error_outline', timeout: 10_000, message: `${name} did not open`,
        caption: e.message ?? 'The board did not confirm the start.', actions: [{ icon: 'close', color: 'white', round: true }],
      });
    } else if (e.state === 'sent') {
      // Only a queued start is reported as sent: it has left the line.
      Notify.create({ type: 'info', icon: 'play_arrow', message: `${name}: its turn has come`, caption: 'Sent to the board.' });
    } else if (e.state === 'cancelled') {
      Notify.create({ type: 'info', icon: 'remove_circle_outline', message: `${name} was taken out of the line` });
    }
  });
}
