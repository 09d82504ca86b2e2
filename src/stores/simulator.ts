import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api } from '../services/api-client';
import type { FaultChange, SimBoard } from '../types/simulator';

/**
 * The demo's simulated boards, through the server's admin-only proxy (the simulator's own
 * control API is on another origin the browser may not call).
 */
export const useSimulatorStore = defineStore('simulator', () => {
  const boards = ref<SimBoard[]>([]);
  const loaded = ref(false);

  async function load(): Promise<void> {
    const res = await api.get<{ controllers: SimBoard[] } | SimBoard[]>('/demo/simulator/controllers', { quiet: true });
    boards.value = Array.isArray(res) ? res : res.controllers;
    loaded.value = true;
  }

  function put(b: SimBoard | null | undefined) {
    if (!b || typeof b.serial !== 'string') return;
    const i = boards.value.findIndex((x) => x.serial === b.serial);
    if (i >= 0) boards.value[i] = b;
  }

  async function setRain(serial: string, tripped: boolean): Promise<void> {
    put(await api.post<SimBoard>(`/demo/simulator/controllers/${encodeURIComponent(serial)}/rain`, { tripped }));
  }

  async function setFault(serial: string, change: FaultChange): Promise<void> {
    put(await api.post<SimBoard>(`/demo/simulator/controllers/${encodeURIComponent(serial)}/faults`, change));
  }

  function clear() {
    boards.value = [];
    loaded.value = false;
  }

  return { boards, loaded, load, setRain, setFault, clear };
});
