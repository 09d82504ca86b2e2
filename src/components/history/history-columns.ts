import type { QTableColumn } from 'quasar';
import type { RunHistoryRow } from '../../types/history';

/** Columns of the run-history table; `sortable` ones are sorted by the server under the same name. */
export const historyColumns: QTableColumn<RunHistoryRow>[] = [
  { name: 'plannedStart', label: 'Planned start', field: 'plannedStart', align: 'left', sortable: true },
  { name: 'site', label: 'Site', field: 'siteName', align: 'left', sortable: true },
  { name: 'zone', label: 'Zone', field: 'zoneName', align: 'left', sortable: true },
  { name: 'program', label: 'Program', field: 'programName', align: 'left' },
  { name: 'state', label: 'Outcome', field: 'state', align: 'left', sortable: true },
  { name: 'plannedMinutes', label: 'Planned min', field: 'plannedMinutes', align: 'right', sortable: true },
  { name: 'actualMinutes', label: 'Actual min', field: 'actualMinutes', align: 'right', sortable: true },
  { name: 'litres', label: 'Water', field: 'litres', align: 'right', sortable: true },
  { name: 'reason', label: 'Why', field: 'reason', align: 'left' },
];

/** "Manual", "Walk test" or the program's name. */
export function programText(r: RunHistoryRow): string {
  if (r.programName) return r.programName;
  if (r.runKind === 'walk') return 'Walk test';
  if (r.runKind === 'manual') return 'Started by hand';
  return r.programId ? 'Deleted program' : r.runKind;
}

/** A moment shown in the browser's time, short. */
export function whenText(iso: string | null): string {
  if (!iso) return '—';
  return new Date(iso).toLocaleString(undefined, { month: 'short', day: 'numeric', hour: '2-digit', minute: '2-digit' });
}
