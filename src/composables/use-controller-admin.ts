import { Dialog, Notify } from 'quasar';
import { ApiError } from '../services/api-client';
import { useDevicesStore } from '../stores/devices';
import { useSessionStore } from '../stores/session';
import type { Controller, SiteDetail } from '../types/api';
import type { MoveResult, ProvisionResult } from '../types/devices';
import ProvisionDialog from '../components/controllers/ProvisionDialog.vue';
import SecretDialog from '../components/controllers/SecretDialog.vue';
import MoveDialog from '../components/controllers/MoveDialog.vue';
import RelayMapDialog from '../components/controllers/RelayMapDialog.vue';
import ServiceRecordsDialog from '../components/service/ServiceRecordsDialog.vue';

/** What the server said when it refused (409 valves_open, retired …), shown as it is. */
function refused(what: string, e: unknown) {
  if (e instanceof ApiError && e.status === 401) return;
  Notify.create({ type: 'negative', icon: 'error_outline', timeout: 9000, message: what, caption: e instanceof Error ? e.message : undefined, attrs: { 'data-test': 'controller-refused' } });
}

function confirm(opts: { title: string; message: string; ok: string; dataTest: string }): Promise<boolean> {
  return new Promise((resolve) => {
    Dialog.create({
      title: opts.title,
      message: opts.message,
      persistent: true,
      cancel: { flat: true, noCaps: true, label: 'Keep as it is', 'data-test': `${opts.dataTest}-cancel` },
      ok: { color: 'negative', unelevated: true, noCaps: true, label: opts.ok, 'data-test': `${opts.dataTest}-confirm` },
    })
      .onOk(() => resolve(true))
      .onCancel(() => resolve(false));
  });
}

/**
 * The site page's controller actions: provision (admin), the secret shown once, rotate, retire,
 * move, the relay map and service notes. `reload` refreshes the site after a change.
 */
export function useControllerAdmin(site: () => SiteDetail | null, reload: () => Promise<void>) {
  const devices = useDevicesStore();
  const session = useSessionStore();

  function showSecret(title: string, c: { id: number; name: string }, serial: string, secret: string) {
    Dialog.create({ component: SecretDialog, componentProps: { title, controllerId: c.id, controllerName: c.name, siteName: site()?.name ?? '', serial, secret } });
  }

  function provision() {
    const s = site();
    if (!s) return;
    Dialog.create({ component: ProvisionDialog, componentProps: { site: s } }).onOk(async (r: ProvisionResult) => {
      showSecret(`${r.controller.name} is added`, r.controller, r.serial, r.secret);
      await reload();
    });
  }

  async function rotate(c: Controller) {
    const ok = await confirm({
      title: 'Change the secret?',
      message: `${c.name} (${c.serial}) is disconnected now and cannot connect again until the new secret is entered on the board.`,
      ok: 'Change the secret',
      dataTest: 'rotate',
    });
    if (!ok) return;
    try {
      const r = await devices.rotateSecret(c.id);
      showSecret(`New secret for ${c.name}`, c, r.serial, r.secret);
    } catch (e) {
      refused(`The secret of ${c.name} was not changed`, e);
    }
  }

  async function retire(c: Controller) {
    const ok = await confirm({
      title: 'Retire this controller?',
      message: `${c.name} (${c.serial}) is disconnected and refused from now on, and it leaves the live view. Its run history, valve events and readings stay. This cannot be undone; a replacement board is added as a new controller.`,
      ok: 'Retire it',
      dataTest: 'retire',
    });
    if (!ok) return;
    try {
      await devices.retire(c.id);
      Notify.create({ type: 'positive', message: `${c.name} is retired. Its history stays.` });
      await reload();
    } catch (e) {
      refused(`${c.name} was not retired`, e);
    }
  }

  function move(c: Controller) {
    Dialog.create({ component: MoveDialog, componentProps: { controller: c, siteName: site()?.name ?? '' } }).onOk(async (r: MoveResult & { siteName: string }) => {
      const n = r.removedFromPrograms;
      Dialog.create({
        title: `${c.name} moved`,
        message: `It now serves ${r.siteName}, with its zones. ${n === 0 ? 'No zone was in another site’s programs.' : `${n} ${n === 1 ? 'zone was' : 'zone entries were'} taken out of programs at the old site.`}`,
        ok: { unelevated: true, noCaps: true, label: 'OK', 'data-test': 'move-result-ok' },
      });
      await reload();
    });
  }

  function relays(c: Controller) {
    Dialog.create({ component: RelayMapDialog, componentProps: { controller: c, canEdit: session.hasRole('admin', 'manager') && !c.retiredAt } }).onDismiss(() => void reload());
  }

  function serviceRecords(c: Controller) {
    Dialog.create({
      component: ServiceRecordsDialog,
      componentProps: { target: { kind: 'controller', id: c.id }, title: c.name, subtitle: `${c.serial} · ${site()?.name ?? ''}`, canWrite: session.hasRole('admin', 'manager', 'technician') },
    });
  }

  return { provision, rotate, retire, move, relays, serviceRecords };
}
