import type { ErrorRequestHandler } from 'express';
import { ZodError } from 'zod';
import type { Logger } from 'pino';
import type { ErrorBody, ErrorDetail } from './contracts/common';

/**
 * A failure a caller can act on; becomes `{ error: { code, message, details } }`. `details` is
 * null when there is nothing to add, and for field problems a list of `{ path, message }`.
 */
export class AppError extends Error {
  constructor(
    readonly status: number,
    readonly code: string,
    message: string,
    readonly details?: unknown,
  ) {
    super(message);
  }
}

export const badRequest = (message: string, details?: unknown) => new AppError(400, 'bad_request', message, details);
export const unauthorized = (message = 'Sign in to continue') => new AppError(401, 'unauthorized', message);
export const forbidden = (message = 'Your role may not do this') => new AppError(403, 'forbidden', message);
export const notFound = (what = 'Resource') => new AppError(404, 'not_found', `${what} not found`);
export const conflict = (code: string, message: string, details?: unknown) => new AppError(409, code, message, details);

const joinPath = (path: readonly PropertyKey[]) => path.map(String).join('.');

/**
 * One detail per problem, `path` naming the field ("" for the body itself). zod reports unknown
 * keys as one issue on the object holding them; each key becomes a detail of its own.
 */
export function zodDetails(err: ZodError): ErrorDetail[] {
  return err.issues.flatMap((i): ErrorDetail[] =>
    i.code === 'unrecognized_keys'
      ? i.keys.map((k) => ({ path: joinPath([...i.path, k]), message: 'Unknown field', code: i.code }))
      : [{ path: joinPath(i.path), message: i.message, code: i.code }],
  );
}

/** The body of every error answer, also for the few written outside the error handler. */
export const errorBody = (code: string, message: string, details: unknown = null): ErrorBody => ({
  error: { code, message, details: details ?? null },
});

const kB = (bytes: number) => `${Math.round(bytes / 1024)} kB`;

export function validationError(err: ZodError) {
  return new AppError(400, 'validation_failed', 'Some fields are not valid', zodDetails(err));
}

export function errorHandler(log: Logger): ErrorRequestHandler {
  return (err, req, res, _next) => {
    let e: AppError;
    if (err instanceof AppError) e = err;
    else if (err instanceof ZodError) e = validationError(err);
    else if (err?.type === 'entity.too.large') {
      const limitBytes = Number(err.limit);
      e = new AppError(400, 'body_too_large', 'The request body is too large', [
        { path: '', message: `A request body may be at most ${kB(limitBytes)}`, code: 'too_big', limitBytes },
      ]);
    }
    else if (err?.type === 'entity.parse.failed') e = new AppError(400, 'bad_json', 'The request body is not valid JSON');
    else if (err?.type && typeof err.status === 'number' && err.status < 500)
      e = new AppError(err.status, 'bad_request', 'The request could not be read');
    else {
      log.error({ err, url: req.originalUrl, method: req.method }, 'unhandled error');
      e = new AppError(500, 'internal', 'Something went wrong on the server');
    }
    if (res.headersSent) return;
    res.status(e.status).json(errorBody(e.code, e.message, e.details));
  };
}
