import { reactive } from 'vue';
import type { ZodError } from 'zod';
import { ApiError } from '../services/api-client';

type Issue = ZodError['issues'][number];

/** zod's default text for a missing number is technical; an empty field just needs a value. */
function messageOf(issue: Issue, empty: (path: string) => boolean): string {
  const path = issue.path.join('.');
  if (issue.code === 'invalid_type' && empty(path)) return 'Enter a value';
  return issue.message;
}

/**
 * Per-field messages for a form, from the shared zod schemas (as the user types) and from the
 * server's 400/409 details ([{ path, message }]) after a save. Keys are dotted paths.
 */
export function useFieldErrors() {
  const client = reactive<Record<string, string>>({});
  const server = reactive<Record<string, string>>({});
  const general = reactive<{ message: string }>({ message: '' });

  function set(target: Record<string, string>, entries: [string, string][]) {
    for (const k of Object.keys(target)) delete target[k];
    for (const [k, v] of entries) if (!(k in target)) target[k] = v;
  }

  /** Replace the client messages with a zod result's issues (none when it parsed). */
  function fromZod(error: ZodError | undefined, empty: (path: string) => boolean = () => false) {
    set(client, (error?.issues ?? []).map((i) => [i.path.join('.') || '_', messageOf(i, empty)]));
  }

  /** Show a failed save: field details on their fields, anything else as a general message. */
  function fromServer(e: unknown, knownFields: string[]) {
    if (!(e instanceof ApiError)) {
      general.message = 'The change was not saved.';
      return;
    }
    const details = e.fieldDetails;
    set(server, details.map((d) => [d.path || '_', d.message]));
    const unplaced = details.filter((d) => !knownFields.includes(d.path));
    general.message = details.length === 0 || unplaced.length ? e.message : '';
    if (unplaced.length) general.message += ': ' + unplaced.map((d) => `${d.path || 'form'} — ${d.message}`).join('; ');
  }

  /** The user changed a field: the server's old message for it no longer applies. */
  function clearServer(field?: string) {
    if (field) delete server[field];
    else set(server, []);
    general.message = '';
  }

  /** Message for a field: the server's (it knows relays and serials) before the client's. */
  function of(field: string, show = true): string | undefined {
    if (server[field]) return server[field];
    return show ? client[field] : undefined;
  }

  const hasClientErrors = () => Object.keys(client).length > 0;

  return { client, server, general, fromZod, fromServer, clearServer, of, hasClientErrors };
}
