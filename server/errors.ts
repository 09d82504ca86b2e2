import type { ErrorRequestHandler } from 'express';
import { ZodError } from 'zod';
import type { Logger } from 'pino';

/** A failure a caller can act on; becomes `{ error: { code, message, details } }`. */
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

export function zodDetails(err: ZodError) {
  return err.issues.map((i) => ({ path: i.path.join('.'), message: i.message, code: i.code }));
}

export function validationError(err: ZodError) {
  return new AppError(400, 'validation_failed', 'Some fields are not valid', zodDetails(err));
}

export function errorHandler(log: Logger): ErrorRequestHandler {
  return (err, req, res, _next) => {
    let e: AppError;
    if (err instanceof AppError) e = err;
    else if (err instanceof ZodError) e = validationError(err);
    else if (err?.type === 'entity.too.large') e = new AppError(400, 'body_too_large', 'The request body is too large');
    else if (err?.type === 'entity.parse.failed') e = new AppError(400, 'bad_json', 'The request body is not valid JSON');
    else if (err?.type && typeof err.status === 'number' && err.status < 500)
      e = new AppError(err.status, 'bad_request', 'The request could not be read');
    else {
      log.error({ err, url: req.originalUrl, method: req.method }, 'unhandled error');
      e = new AppError(500, 'internal', 'Something went wrong on the server');
    }
    if (res.headersSent) return;
    res.status(e.status).json({ error: { code: e.code, message: e.message, details: e.details } });
  };
}
