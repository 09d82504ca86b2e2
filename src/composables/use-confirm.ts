import { useQuasar } from 'quasar';

/** A yes/no question with big buttons (data-test confirm-ok / confirm-cancel); resolves true on yes. */
export function useConfirm() {
  const $q = useQuasar();
  return (q: { title: string; message: string; ok: string; danger?: boolean; cancel?: string }): Promise<boolean> =>
    new Promise((resolve) => {
      $q.dialog({
        title: q.title,
        message: q.message,
        persistent: true,
        ok: { label: q.ok, color: q.danger ? 'negative' : 'primary', unelevated: true, noCaps: true, class: 'touch-btn q-px-md', 'data-test': 'confirm-ok' },
        cancel: { label: q.cancel ?? 'Keep as it is', flat: true, noCaps: true, class: 'touch-btn', color: 'grey-9', 'data-test': 'confirm-cancel' },
      })
        .onOk(() => resolve(true))
        .onCancel(() => resolve(false));
    });
}
