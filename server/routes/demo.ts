import { Router } from 'express';
import { z } from 'zod';
import { AppError, notFound } from '../errors';
import { requireRole } from '../middleware/auth';
import { parse } from '../middleware/validate';
import type { AppDeps } from '../app';

const serialParam = z.object({ serial: z.string().regex(/^[A-Z0-9][A-Z0-9-]{3,31}$/) });
const rainBody = z.strictObject({ tripped: z.boolean() });
const faultBody = z.strictObject({
  fault: z.enum(['offline', 'no_ack', 'stuck_valve', 'broken_head', 'clogged', 'clock_skew', 'low_voltage']),
  on: z.boolean(),
  relay: z.number().int().min(1).max(8).optional(),
  offsetMinutes: z.number().int().min(-1440).max(1440).optional(),
});

/**
 * Demo mode only, admins only: the simulated fleet's control API, relayed so the browser keeps
 * to one origin (the app's CSP allows no other).
 */
export function demoRoutes(deps: AppDeps): Router {
  const r = Router();
  r.use((_req, _res, next) => {
    if (!deps.config.RUNNEL_DEMO) throw notFound('Page');
    next();
  });
  r.use(requireRole('admin'));
  const target = () => {
    const u = deps.services?.demo.simulatorUrl;
    if (!u) throw new AppError(503, 'simulator_not_running', 'The simulated fleet is not running on this server');
    return u;
  };
  const relay = async (path: string, body?: unknown) => {
    const res = await fetch(`${target()}${path}`, body === undefined ? {} : { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
    return { status: res.status, json: await res.json().catch(() => ({})) };
  };
  r.get('/simulator/controllers', async (_req, res) => {
    const out = await relay('/controllers');
    res.status(out.status).json(out.json);
  });
  r.post('/simulator/controllers/:serial/rain', async (req, res) => {
    const { serial } = parse(serialParam, req.params);
    const out = await relay(`/controllers/${serial}/rain`, parse(rainBody, req.body));
    res.status(out.status).json(out.json);
  });
  r.post('/simulator/controllers/:serial/faults', async (req, res) => {
    const { serial } = parse(serialParam, req.params);
    const out = await relay(`/controllers/${serial}/faults`, parse(faultBody, req.body));
    res.status(out.status).json(out.json);
  });
  return r;
}
