import { computed, reactive, ref, watch } from 'vue';
import type { ZodType } from 'zod';
import { useFieldErrors } from './use-field-errors';

type ApiShape = Record<string, unknown>;

const same = (a: unknown, b: unknown) => JSON.stringify(a) === JSON.stringify(b);

function valueAt(obj: unknown, path: string): unknown {
  return path.split('.').reduce<unknown>((o, k) => (o && typeof o === 'object' ? (o as Record<string, unknown>)[k] : undefined), obj);
}

/**
 * A create/edit form over one of the shared zod schemas.
 * - `form` holds what the user sees (in their units);
 * - `toApi(form)` gives every field as the API wants it (metric; undefined when empty);
 * - the schema checks that object as the user types, with the server's own messages;
 * - an edit sends only the fields that changed, so a technician's save stays within what they may change.
 */
export function useEntityForm<F extends object, A extends ApiShape>(opts: {
  initial: F;
  toApi: (form: F) => A;
  schema: ZodType;
  mode: 'create' | 'edit';
}) {
  const form = reactive(structuredClone(opts.initial)) as F;
  const start = opts.toApi(opts.initial);
  const attempted = ref(false);
  const busy = ref(false);
  const errors = useFieldErrors();

  const current = computed(() => opts.toApi(form as F));
  const changed = computed(() => Object.keys(current.value).filter((k) => !same(current.value[k], start[k])));

  watch(
    current,
    (now, before) => {
      const r = opts.schema.safeParse(now);
      errors.fromZod(r.success ? undefined : r.error, (path) => valueAt(now, path) === undefined);
      if (!before) return;
      for (const k of Object.keys(now)) {
        if (same(now[k], before[k])) continue;
        for (const p of Object.keys(errors.server)) if (p === k || p.startsWith(`${k}.`)) errors.clearServer(p);
      }
    },
    { immediate: true, deep: true },
  );

  /** The message to show on a field (dotted path): once it was changed, or after a save attempt. */
  function show(path: string): string | undefined {
    const top = path.split('.')[0];
    return errors.of(path, attempted.value || changed.value.includes(top));
  }

  /** First message for any path under a prefix (lists such as no-watering windows). */
  function showUnder(prefix: string): string | undefined {
    const paths = [...Object.keys(errors.server), ...Object.keys(errors.client)];
    const hit = paths.find((p) => p === prefix || p.startsWith(`${prefix}.`));
    return hit ? show(hit) : undefined;
  }

  /** What to send: everything (create) or only the changed fields (edit). */
  function payload(): Partial<A> {
    const out: ApiShape = {};
    const keys = opts.mode === 'create' ? Object.keys(current.value) : changed.value;
    for (const k of keys) if (current.value[k] !== undefined) out[k] = current.value[k];
    return out as Partial<A>;
  }

  /**
   * Validate, then send. Returns the saved entity, or undefined when the form has errors or the
   * server refused (its field details are then on the fields).
   */
  async function submit<R>(send: (body: Partial<A>) => Promise<R>): Promise<R | undefined> {
    attempted.value = true;
    errors.clearServer();
    if (errors.hasClientErrors()) return undefined;
    busy.value = true;
    try {
      return await send(payload());
    } catch (e) {
      errors.fromServer(e, Object.keys(current.value));
      return undefined;
    } finally {
      busy.value = false;
    }
  }

  return { form, errors, attempted, busy, changed, show, showUnder, payload, submit };
}

/** A number input's value: a finite number, or undefined when empty. */
export function num(v: number | string | null | undefined): number | undefined {
  if (v === null || v === undefined || v === '') return undefined;
  const n = typeof v === 'number' ? v : Number(v);
  return Number.isFinite(n) ? n : undefined;
}
