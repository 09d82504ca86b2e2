import { configureApiClient } from '../services/api-client';
import { useSessionStore } from '../stores/session';
import { useSitesStore } from '../stores/sites';
import type { BootContext } from './context';

/** A 401 from any call means the session ended: forget the user and go to sign-in, then come back. */
export function install({ pinia, router }: BootContext): void {
  configureApiClient({
    onUnauthorized: () => {
      useSessionStore(pinia).clear();
      useSitesStore(pinia).clear();
      const here = router.currentRoute.value;
      if (here.name === 'sign-in') return;
      void router.push({ name: 'sign-in', query: here.fullPath !== '/' ? { redirect: here.fullPath } : {} });
    },
  });
}
