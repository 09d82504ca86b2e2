import type { ZoneRunState } from '../../types/history';

/** What the history page filters by; empty values are left out of the query. */
export type HistoryFilters = {
  siteId: number | null;
  zoneId: number | null;
  /** A program id, 'manual', or null for any. */
  programId: number | 'manual' | null;
  from: string;
  to: string;
  states: ZoneRunState[];
};

export const emptyFilters = (): HistoryFilters => ({ siteId: null, zoneId: null, programId: null, from: '', to: '', states: [] });

/** The query string shared by the page request and the CSV link. */
export function filterQuery(f: HistoryFilters, sort: string, order: 'asc' | 'desc'): URLSearchParams {
  const q = new URLSearchParams();
  if (f.siteId) q.set('siteId', String(f.siteId));
  if (f.zoneId) q.set('zoneId', String(f.zoneId));
  if (f.programId) q.set('programId', String(f.programId));
  if (f.from) q.set('from', f.from);
  if (f.to) q.set('to', f.to);
  if (f.states.length) q.set('state', f.states.join(','));
  q.set('sort', sort);
  q.set('order', order);
  return q;
}
