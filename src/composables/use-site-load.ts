import { ref, watch, type Ref } from 'vue';
import { ApiError } from '../services/api-client';

export type LoadState = 'loading' | 'ready' | 'missing' | 'failed';

/**
 * Load a site's sub-page data whenever the site id changes: 404 means the site is missing or
 * not the user's; anything else is a failure the page offers to retry.
 */
export function useSiteLoad(siteId: () => number, load: (id: number) => Promise<unknown>) {
  const state: Ref<LoadState> = ref('loading');
  const failure = ref('');

  async function run(showSpinner = true): Promise<void> {
    if (showSpinner) state.value = 'loading';
    try {
      await load(siteId());
      state.value = 'ready';
    } catch (e) {
      if (e instanceof ApiError && e.status === 404) state.value = 'missing';
      else if (!(e instanceof ApiError && e.status === 401)) {
        state.value = 'failed';
        failure.value = e instanceof Error ? e.message : '';
      }
    }
  }

  watch(siteId, () => void run(), { immediate: true });
  return { state, failure, reload: () => run(false), retry: () => run(true) };
}
