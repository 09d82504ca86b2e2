import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api } from '../services/api-client';
import type { CreateProgram, UpdateProgram } from '../../server/contracts/programs';
import type { Program } from '../types/programs';

/** The watering programs of the open site. Writes throw ApiError; the editor shows its field details. */
export const useProgramsStore = defineStore('programs', () => {
  const siteId = ref<number | null>(null);
  const items = ref<Program[]>([]);

  async function load(id: number): Promise<void> {
    if (siteId.value !== id) items.value = [];
    const res = await api.get<{ items: Program[] }>(`/sites/${id}/programs`, { quiet: true });
    siteId.value = id;
    items.value = res.items;
  }

  function put(p: Program) {
    if (p.siteId !== siteId.value) return;
    const i = items.value.findIndex((x) => x.id === p.id);
    if (i >= 0) items.value.splice(i, 1, p);
    else items.value = [...items.value, p].sort((a, b) => a.name.localeCompare(b.name));
  }

  async function create(site: number, body: Partial<CreateProgram>): Promise<Program> {
    const p = await api.post<Program>(`/sites/${site}/programs`, body, { quiet: true });
    put(p);
    return p;
  }

  async function update(id: number, body: Partial<UpdateProgram>, opts: { quiet?: boolean } = { quiet: true }): Promise<Program> {
    const p = await api.patch<Program>(`/programs/${id}`, body, opts);
    put(p);
    return p;
  }

  async function remove(id: number): Promise<void> {
    await api.delete(`/programs/${id}`);
    items.value = items.value.filter((p) => p.id !== id);
  }

  return { siteId, items, load, create, update, remove };
});
