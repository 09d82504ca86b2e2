import { Notify } from 'quasar';
import type { BootContext } from './context';

/** Notifications at the top, where a phone user sees them above the keyboard. */
export function install(_ctx: BootContext): void {
  Notify.setDefaults({ position: 'top', timeout: 4000, progress: false });
}
