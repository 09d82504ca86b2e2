import { useSitesStore } from '../../stores/sites';

/** "Larkspur Court, Quarry Park" for a list of site ids (unknown ids as #id). */
export function useSiteNames() {
  const sites = useSitesStore();
  if (!sites.listLoaded) void sites.loadList().catch(() => {});
  const nameOf = (id: number) => sites.list.find((s) => s.id === id)?.name ?? `Site #${id}`;
  const namesOf = (ids: number[]) => ids.map(nameOf).join(', ');
  return { nameOf, namesOf };
}
