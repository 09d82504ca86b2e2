import express, { type ErrorRequestHandler, type Express, type Request } from 'express';
import { z, type ZodError } from 'zod';
import type { SimBoard } from './board';
import { faultChangeSchema } from './faults';

/**
 * The simulator's control API (loopback only; docs/simulator.md): look at the boards, trip the
 * rain input, press a button, switch faults. Every body is checked with zod; errors have the
 * project's one shape `{ error: { code, message, details } }`.
 */

export const rainBodySchema = z.strictObject({ tripped: z.boolean() });
export const buttonBodySchema = z.strictObject({ relay: z.number().int().min(1).max(8), open: z.boolean() });

class ControlError extends Error {
  constructor(
    readonly status: number,
    readonly code: string,
    message: string,
    readonly details?: unknown,
  ) {
    super(message);
  }
}

const details = (e: ZodError) => e.issues.map((i) => ({ path: i.path.join('.'), message: i.message, code: i.code }));

function parseBody<S extends z.ZodType>(schema: S, body: unknown): z.infer<S> {
  const r = schema.safeParse(body);
  if (!r.success) throw new ControlError(400, 'validation_failed', 'Some fields are not valid', details(r.error));
  return r.data;
}

/** Relay numbers outside the board are a 400, like any other bad field. */
function onBoard<T>(fn: () => T): T {
  try {
    return fn();
  } catch (e) {
    if (e instanceof RangeError) throw new ControlError(400, 'unknown_relay', e.message);
    throw e;
  }
}

export function controllerView(b: SimBoard) {
  return {
    serial: b.serial,
    online: b.online,
    relayCount: b.spec.relayCount,
    hasFlowSensor: b.spec.hasFlowSensor,
    masterValveRelay: b.spec.masterValveRelay ?? null,
    relays: b.relayStates(),
    rain: b.rainTripped,
    faults: b.faults(),
    latestSample: b.latestSample(),
    stats: b.stats,
  };
}
export type ControllerView = ReturnType<typeof controllerView>;

export function createControlApp(deps: { boards: Map<string, SimBoard> }): Express {
  const { boards } = deps;
  const app = express();
  app.disable('x-powered-by');
  app.use(express.json({ limit: '16kb' }));

  const boardOf = (req: Request) => {
    const b = boards.get(String(req.params.serial));
    if (!b) throw new ControlError(404, 'not_found', `No simulated controller ${req.params.serial}`);
    return b;
  };

  app.get('/health', (_req, res) => {
    let online = 0;
    for (const b of boards.values()) if (b.online) online++;
    res.json({ status: 'ok', controllers: boards.size, online });
  });

  app.get('/controllers', (_req, res) => {
    res.json({ controllers: [...boards.values()].map(controllerView) });
  });

  app.get('/controllers/:serial', (req, res) => {
    res.json(controllerView(boardOf(req)));
  });

  app.post('/controllers/:serial/rain', (req, res) => {
    const b = boardOf(req);
    const body = parseBody(rainBodySchema, req.body);
    b.setRain(body.tripped);
    res.json(controllerView(b));
  });

  app.post('/controllers/:serial/faults', (req, res) => {
    const b = boardOf(req);
    const body = parseBody(faultChangeSchema, req.body);
    onBoard(() => b.setFault(body));
    res.json(controllerView(b));
  });

  app.post('/controllers/:serial/button', (req, res) => {
    const b = boardOf(req);
    const body = parseBody(buttonBodySchema, req.body);
    onBoard(() => b.pressButton(body.relay, body.open));
    res.json(controllerView(b));
  });

  app.use((req, _res, next) => next(new ControlError(404, 'not_found', `No route ${req.method} ${req.path}`)));

  const onError: ErrorRequestHandler = (err, _req, res, _next) => {
    let e: ControlError;
    if (err instanceof ControlError) e = err;
    else if (err?.type === 'entity.parse.failed') e = new ControlError(400, 'bad_json', 'The request body is not valid JSON');
    else if (err?.type === 'entity.too.large') e = new ControlError(400, 'body_too_large', 'The request body is too large');
    else if (typeof err?.status === 'number' && err.status >= 400 && err.status < 500) e = new ControlError(err.status, 'bad_request', 'The request could not be read');
    else e = new ControlError(500, 'internal', 'Something went wrong in the simulator');
    if (res.headersSent) return;
    res.status(e.status).json({ error: { code: e.code, message: e.message, details: e.details } });
  };
  app.use(onError);
  return app;
}
