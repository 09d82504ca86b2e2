import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api } from '../services/api-client';
import type { Controller, Site, SiteDetail, SiteSummary, Zone } from '../types/api';
import type { CreateController, CreateSite, CreateZone, UpdateController, UpdateSite, UpdateZone } from '../../server/contracts/index';

/** The sites the user may see, and the one site that is open. */
export const useSitesStore = defineStore('sites', () => {
  const list = ref<SiteSummary[]>([]);
  const listLoaded = ref(false);
  const current = ref<SiteDetail | null>(null);

  async function loadList(): Promise<void> {
    const res = await api.get<{ items: SiteSummary[] }>('/sites');
    list.value = res.items;
    listLoaded.value = true;
  }

  async function loadSite(id: number): Promise<SiteDetail> {
    const site = await api.get<SiteDetail>(`/sites/${id}`, { quiet: true });
    current.value = site;
    return site;
  }

  async function reloadCurrent(): Promise<void> {
    if (current.value) await loadSite(current.value.id);
  }

  // Writes throw ApiError; forms show its field details. All numbers are metric.
  const createSite = (body: CreateSite) => api.post<Site>('/sites', body);
  const updateSite = (id: number, body: UpdateSite) => api.patch<Site>(`/sites/${id}`, body);
  const deleteSite = (id: number) => api.delete(`/sites/${id}`);

  const createController = (body: CreateController) => api.post<Controller>('/controllers', body);
  const updateController = (id: number, body: UpdateController) => api.patch<Controller>(`/controllers/${id}`, body);
  const deleteController = (id: number) => api.delete(`/controllers/${id}`);

  const createZone = (body: CreateZone) => api.post<Zone>('/zones', body);
  const updateZone = (id: number, body: UpdateZone) => api.patch<Zone>(`/zones/${id}`, body);
  const deleteZone = (id: number) => api.delete(`/zones/${id}`);

  function clear(): void {
    list.value = [];
    listLoaded.value = false;
    current.value = null;
  }

  return {
    list, listLoaded, current, loadList, loadSite, reloadCurrent, clear,
    createSite, updateSite, deleteSite,
    createController, updateController, deleteController,
    createZone, updateZone, deleteZone,
  };
});
