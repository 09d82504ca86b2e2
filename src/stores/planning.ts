import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api } from '../services/api-client';
import type { GroupHeads } from '../../server/contracts/supply';
import type { GroupHeadsResult, PipeQuery, SitePlanning } from '../types/planning';

/** Zones of a site against its supply and a chosen pipe, and the head-grouping helper. */
export const usePlanningStore = defineStore('planning', () => {
  const plan = ref<SitePlanning | null>(null);
  let asked = 0;

  /** The latest request wins: a slower answer for an older pipe is dropped. */
  async function load(siteId: number, pipe: PipeQuery): Promise<SitePlanning | null> {
    const n = ++asked;
    const q = new URLSearchParams({ pipeMm: String(pipe.pipeMm), pipeLengthM: String(pipe.pipeLengthM), c: String(pipe.c) });
    const res = await api.get<SitePlanning>(`/sites/${siteId}/planning?${q}`, { quiet: true });
    if (n !== asked) return null;
    plan.value = res;
    return res;
  }

  /** Throws ApiError (400 with details such as heads.3.flowLpm). */
  const groupHeads = (body: GroupHeads) => api.post<GroupHeadsResult>('/planning/group-heads', body, { quiet: true });

  function clear(): void {
    plan.value = null;
  }

  return { plan, load, groupHeads, clear };
});
