import { defineStore } from 'pinia';
import { computed, ref } from 'vue';
import { api, ApiError } from '../services/api-client';
import type { Me, Role, UnitSystem } from '../types/api';

/** Who is signed in, and their preferences. */
export const useSessionStore = defineStore('session', () => {
  const me = ref<Me | null>(null);
  /** Whether we have asked the server "who am I" at least once. */
  const checked = ref(false);

  const signedIn = computed(() => me.value !== null);
  const role = computed<Role | null>(() => me.value?.role ?? null);
  const unitSystem = computed<UnitSystem>(() => me.value?.unitSystem ?? 'metric');

  function hasRole(...roles: Role[]): boolean {
    return !!me.value && roles.includes(me.value.role);
  }

  async function load(): Promise<Me | null> {
    try {
      me.value = await api.get<Me>('/auth/me', { quiet: true, allowUnauthorized: true });
    } catch (e) {
      if (!(e instanceof ApiError) || e.status !== 401) throw e;
      me.value = null;
    } finally {
      checked.value = true;
    }
    return me.value;
  }

  /** Throws ApiError (401 bad_credentials, 429 …); the sign-in page shows the message. */
  async function signIn(email: string, password: string): Promise<Me> {
    me.value = await api.post<Me>('/auth/sign-in', { email, password }, { quiet: true, allowUnauthorized: true });
    checked.value = true;
    return me.value;
  }

  async function signOut(): Promise<void> {
    try {
      await api.post('/auth/sign-out', undefined, { allowUnauthorized: true });
    } finally {
      me.value = null;
    }
  }

  /** Forget the user locally (the server said 401). */
  function clear(): void {
    me.value = null;
  }

  async function setUnitSystem(system: UnitSystem): Promise<void> {
    if (!me.value || me.value.unitSystem === system) return;
    const previous = me.value.unitSystem;
    me.value = { ...me.value, unitSystem: system }; // switch at once; the server confirms
    try {
      me.value = await api.patch<Me>('/auth/me', { unitSystem: system });
    } catch (e) {
      if (me.value) me.value = { ...me.value, unitSystem: previous };
      throw e;
    }
  }

  return { me, checked, signedIn, role, unitSystem, hasRole, load, signIn, signOut, clear, setUnitSystem };
});
