/** A moment in the reader's own time, short enough for a table cell. */
export const whenText = (iso: string | null | undefined, none = '—') =>
  iso ? new Date(iso).toLocaleString([], { dateStyle: 'medium', timeStyle: 'short' }) : none;
