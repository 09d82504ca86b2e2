import { Notify } from 'quasar';
import { api, ApiError } from './api-client';

export type UploadProgress = { loaded: number; total: number; fraction: number };

export type UploadOptions = {
  /** Called as the body leaves the browser (XMLHttpRequest upload events). */
  onProgress?: (p: UploadProgress) => void;
  /** Show no notification for the error (the caller shows it in place). */
  quiet?: boolean;
};

/**
 * POST a file as multipart/form-data, with upload progress. fetch() cannot report how much of
 * a body has been sent, so this one call uses XMLHttpRequest; errors come back as the same
 * ApiError the fetch wrapper throws, with the same notification.
 */
export function uploadFile<T>(path: string, field: string, file: File, opts: UploadOptions = {}): Promise<T> {
  const body = new FormData();
  body.append(field, file, file.name);
  return uploadForm<T>(path, body, opts);
}

/** POST a whole multipart form (text fields and files), with upload progress. */
export function uploadForm<T>(path: string, body: FormData, opts: UploadOptions = {}): Promise<T> {
  let size = 0;
  for (const v of body.values()) size += typeof v === 'string' ? v.length : v.size;
  return new Promise<T>((resolve, reject) => {
    const xhr = new XMLHttpRequest();
    xhr.open('POST', `/api${path}`);
    xhr.withCredentials = true;
    xhr.setRequestHeader('Accept', 'application/json');
    xhr.responseType = 'text';
    xhr.upload.onprogress = (e) => {
      const total = e.lengthComputable ? e.total : size;
      opts.onProgress?.({ loaded: e.loaded, total, fraction: total > 0 ? Math.min(1, e.loaded / total) : 1 });
    };
    xhr.onerror = () => fail(new ApiError(0, 'network', 'Cannot reach the Runnel server. Check the connection and try again.'));
    xhr.onabort = () => fail(new ApiError(0, 'aborted', 'The upload was stopped.'));
    xhr.onload = () => {
      let data: unknown = null;
      try {
        data = xhr.responseText ? JSON.parse(xhr.responseText) : null;
      } catch {
        data = null;
      }
      if (xhr.status >= 200 && xhr.status < 300) {
        opts.onProgress?.({ loaded: size, total: size, fraction: 1 });
        resolve(data as T);
        return;
      }
      const e = (data as { error?: { code?: string; message?: string; details?: unknown } } | null)?.error;
      const err = new ApiError(xhr.status, e?.code ?? `http_${xhr.status}`, e?.message ?? `The server answered ${xhr.status}`, e?.details);
      if (xhr.status === 401) {
        // Let the fetch wrapper notice the ended session: it notifies and goes to sign-in.
        void api.get('/auth/me').catch(() => undefined);
        reject(err);
        return;
      }
      fail(err);
    };
    function fail(err: ApiError) {
      if (!opts.quiet) {
        Notify.create({ type: 'negative', message: err.message, position: 'top', timeout: 6000, actions: [{ icon: 'close', color: 'white', round: true }] });
      }
      reject(err);
    }
    xhr.send(body);
  });
}
