import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api } from '../services/api-client';
import type { SupplyTestInput } from '../../server/contracts/supply';
import type { SupplySummary, SupplyTest, SupplyTestList, SupplyTestSaved } from '../types/planning';

/** A site's supply: its figures and the history of bucket tests and meter readings (newest first). */
export const useSupplyStore = defineStore('supply', () => {
  const siteId = ref<number | null>(null);
  const site = ref<SupplySummary | null>(null);
  const tests = ref<SupplyTest[]>([]);

  async function load(id: number): Promise<void> {
    if (siteId.value !== id) {
      site.value = null;
      tests.value = [];
    }
    const res = await api.get<SupplyTestList>(`/sites/${id}/supply-tests`, { quiet: true });
    siteId.value = id;
    site.value = res.site;
    tests.value = res.items;
  }

  /** Throws ApiError; the form shows its field details. */
  async function record(id: number, body: Partial<SupplyTestInput>): Promise<SupplyTestSaved> {
    const saved = await api.post<SupplyTestSaved>(`/sites/${id}/supply-tests`, body);
    if (siteId.value === id) {
      site.value = saved.site;
      tests.value = [saved.test, ...tests.value.filter((t) => t.id !== saved.test.id)];
    }
    return saved;
  }

  return { siteId, site, tests, load, record };
});
