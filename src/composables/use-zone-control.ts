import { Dialog, Notify } from 'quasar';
import { api, ApiError } from '../services/api-client';
import { useLiveStore } from '../stores/live';
import { useSessionStore } from '../stores/session';
import type { StartResponse } from '../types/live';
import type { Zone } from '../types/api';

/** The longest manual start the server takes by default (MANUAL_MAX_MINUTES); it checks again. */
export const MAX_MANUAL_MINUTES = 60;
export const QUICK_MINUTES = [2, 5, 10, 15] as const;

/**
 * Manual valve control for technicians, managers and admins. The client only asks; the rows
 * change when the boards report (live store), and the notices say what happened.
 */
export function useZoneControl() {
  const live = useLiveStore();
  const session = useSessionStore();

  /** During a rain hold a technician may still test a valve, saying so explicitly (the server audits it). */
  function confirmOverride(zone: Pick<Zone, 'name'>, reason: string): Promise<boolean> {
    return new Promise((resolve) => {
      Dialog.create({
        title: 'Watering is on hold',
        message: `${reason}. Open ${zone.name} anyway to test the valve? This is recorded in the audit log.`,
        ok: { label: 'Test the valve', color: 'primary', 'data-test': 'hold-override-ok' },
        cancel: { label: 'Leave it closed', flat: true },
        persistent: true,
      })
        .onOk(() => resolve(true))
        .onCancel(() => resolve(false));
    });
  }

  async function start(zone: Pick<Zone, 'id' | 'name' | 'siteId' | 'controllerId'>, minutes: number, overrideHold = false): Promise<StartResponse | null> {
    try {
      const r = await api.post<StartResponse>(`/zones/${zone.id}/start`, overrideHold ? { minutes, overrideHold } : { minutes }, { quiet: true });
      live.noteStart(r, zone.siteId, zone.controllerId, zone.name, session.me?.id ?? null);
      if (r.state === 'queued') {
        Notify.create({
          type: 'warning', icon: 'hourglass_top', timeout: 8000,
          message: `${zone.name} is waiting in line`,
          caption: r.reason ? `It opens when it can: ${r.reason}.` : 'It opens when the supply and the controller allow.',
        });
      }
      return r;
    } catch (e) {
      if (e instanceof ApiError && e.code === 'rain_hold' && session.me?.role === 'technician' && !overrideHold) {
        const hold = (e.details as { hold?: { reason?: string } } | undefined)?.hold?.reason ?? 'Watering is held';
        if (await confirmOverride(zone, hold)) return start(zone, minutes, true);
        return null;
      }
      if (e instanceof ApiError && e.code === 'controller_offline') {
        Notify.create({ type: 'warning', icon: 'wifi_off', timeout: 8000, message: `${zone.name} cannot start now`, caption: e.message });
      } else if (e instanceof ApiError && e.status !== 401) {
        Notify.create({ type: 'negative', icon: 'error_outline', message: `${zone.name} was not started`, caption: e.message });
      }
      return null;
    }
  }

  async function stop(zone: Pick<Zone, 'id' | 'name'>): Promise<void> {
    const queued = live.queuePosition(zone.id) !== null;
    if (!queued) live.markClosing(zone.id);
    try {
      await api.post(`/zones/${zone.id}/stop`, undefined, { quiet: true });
    } catch (e) {
      live.markClosing(zone.id, false);
      if (e instanceof ApiError && e.status !== 401) {
        Notify.create({ type: 'negative', icon: 'error_outline', message: `${zone.name} was not stopped`, caption: e.message });
      }
    }
  }

  async function stopSite(site: { id: number; name: string }, zoneIds: number[]): Promise<void> {
    for (const id of zoneIds) if (live.state.valves[id]) live.markClosing(id);
    try {
      await api.post(`/sites/${site.id}/stop`, undefined, { quiet: true });
      Notify.create({ type: 'info', icon: 'stop_circle', message: `Closing every valve at ${site.name}`, caption: 'The rows change as each board confirms.' });
    } catch (e) {
      for (const id of zoneIds) live.markClosing(id, false);
      if (e instanceof ApiError && e.status !== 401) {
        Notify.create({ type: 'negative', icon: 'error_outline', message: 'The valves were not stopped', caption: e.message });
      }
    }
  }

  return { start, stop, stopSite };
}
