import { Notify } from 'quasar';
import type { FieldDetail } from '../types/api';

/** A failed API call, carrying the server's `{ error: { code, message, details } }`. */
export class ApiError extends Error {
  constructor(
    readonly status: number,
    readonly code: string,
    message: string,
    readonly details?: unknown,
  ) {
    super(message);
    this.name = 'ApiError';
  }

  /** Field-level details ([{ path, message }]) when the server sent them. */
  get fieldDetails(): FieldDetail[] {
    if (!Array.isArray(this.details)) return [];
    return this.details.filter(
      (d): d is FieldDetail => !!d && typeof d === 'object' && typeof (d as FieldDetail).message === 'string',
    );
  }
}

export type RequestOptions = {
  /** Show no notification for the error (the caller shows it in place). */
  quiet?: boolean;
  /** Do not leave for the sign-in page on 401 (sign-in itself, the first "who am I"). */
  allowUnauthorized?: boolean;
};

type Hooks = { onUnauthorized: () => void };
let hooks: Hooks = { onUnauthorized: () => {} };

/** Called once from boot/api.ts, so this module needs neither the router nor a store. */
export function configureApiClient(h: Hooks): void {
  hooks = h;
}

function notifyError(message: string): void {
  Notify.create({ type: 'negative', message, position: 'top', timeout: 6000, actions: [{ icon: 'close', color: 'white', round: true }] });
}

async function request<T>(method: string, path: string, body?: unknown, opts: RequestOptions = {}): Promise<T> {
  let res: Response;
  try {
    res = await fetch(`/api${path}`, {
      method,
      credentials: 'same-origin',
      headers: body === undefined ? { Accept: 'application/json' } : { Accept: 'application/json', 'Content-Type': 'application/json' },
      body: body === undefined ? undefined : JSON.stringify(body),
    });
  } catch {
    const err = new ApiError(0, 'network', 'Cannot reach the Runnel server. Check the connection and try again.');
    if (!opts.quiet) notifyError(err.message);
    throw err;
  }
  if (res.status === 204) return undefined as T;
  const data: unknown = await res.json().catch(() => null);
  if (res.ok) return data as T;

  const e = (data as { error?: { code?: string; message?: string; details?: unknown } } | null)?.error;
  const err = new ApiError(res.status, e?.code ?? `http_${res.status}`, e?.message ?? `The server answered ${res.status}`, e?.details);
  if (res.status === 401 && !opts.allowUnauthorized) {
    Notify.create({ type: 'warning', message: 'Your session has ended. Sign in again.', position: 'top' });
    hooks.onUnauthorized();
  } else if (!opts.quiet) {
    notifyError(err.message);
  }
  throw err;
}

export const api = {
  get: <T>(path: string, opts?: RequestOptions) => request<T>('GET', path, undefined, opts),
  post: <T>(path: string, body?: unknown, opts?: RequestOptions) => request<T>('POST', path, body ?? {}, opts),
  patch: <T>(path: string, body: unknown, opts?: RequestOptions) => request<T>('PATCH', path, body, opts),
  put: <T>(path: string, body: unknown, opts?: RequestOptions) => request<T>('PUT', path, body, opts),
  /** Most deletes answer 204 (undefined); a few answer with what is left (T). */
  delete: <T = void>(path: string, opts?: RequestOptions) => request<T>('DELETE', path, undefined, opts),
};
