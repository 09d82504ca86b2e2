/**
 * A local stand-in for a weather service: deterministic, invented daily weather over plain
 * HTTP on loopback, so `npm start` and the tests never reach the internet. The format is
 * Runnel's own (docs/weather.md):
 *
 *   GET /v1/daily?lat=39.74&lon=-104.99&from=2025-07-01&to=2025-07-07
 *   → 200 { version: 1, location: { lat, lon }, days: [{ date, tmaxC, tminC, rhMaxPct, rhMinPct,
 *           windMs, windHeightM, sunshineH, solarMj, rainMm }] }
 *   bad query → 400 { error: "…" }; unknown path → 404 { error: "…" }
 *
 * Dates are the local calendar dates of the place asked about.
 */
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { z } from 'zod';
import { isoDate } from '../contracts/weather';
import { dayNumber, generateDays } from './generator';

export const FAKE_MAX_DAYS = 731;

const dailyQuery = z
  .object({
    lat: z.coerce.number().min(-90).max(90),
    lon: z.coerce.number().min(-180).max(180),
    from: isoDate,
    to: isoDate,
  })
  .refine((q) => q.from <= q.to, { message: 'from must not be after to', path: ['from'] })
  .refine((q) => dayNumber(q.to) - dayNumber(q.from) < FAKE_MAX_DAYS, {
    message: `at most ${FAKE_MAX_DAYS} days per request`,
    path: ['to'],
  });

function send(res: http.ServerResponse, status: number, body: unknown) {
  const text = JSON.stringify(body);
  res.writeHead(status, { 'content-type': 'application/json; charset=utf-8', 'content-length': Buffer.byteLength(text) });
  res.end(text);
}

export function handleFakeWeather(req: http.IncomingMessage, res: http.ServerResponse) {
  const url = new URL(req.url ?? '/', 'http://fake.invalid');
  if (req.method !== 'GET') return send(res, 405, { error: 'only GET is supported' });
  if (url.pathname === '/v1/health') return send(res, 200, { ok: true });
  if (url.pathname !== '/v1/daily') return send(res, 404, { error: `no such path ${url.pathname}` });
  const q = dailyQuery.safeParse(Object.fromEntries(url.searchParams));
  if (!q.success) {
    return send(res, 400, { error: q.error.issues.map((i) => `${i.path.join('.') || 'query'}: ${i.message}`).join('; ') });
  }
  const { lat, lon, from, to } = q.data;
  const days = generateDays(lat, lon, from, to).map((d) => ({ ...d, solarMj: null }));
  send(res, 200, { version: 1, location: { lat, lon }, days });
}

export type FakeWeatherService = { url: string; port: number; close: () => Promise<void> };

/** Start the fake weather service; port 0 picks a free port. */
export async function startFakeWeatherService(
  opts: { port?: number; host?: string } = {},
): Promise<FakeWeatherService> {
  const host = opts.host ?? '127.0.0.1';
  const server = http.createServer((req, res) => {
    try {
      handleFakeWeather(req, res);
    } catch {
      if (!res.headersSent) send(res, 500, { error: 'fake weather service failed' });
    }
  });
  await new Promise<void>((ok, fail) => {
    server.once('error', fail);
    server.listen(opts.port ?? 3902, host, () => ok());
  });
  const { port } = server.address() as AddressInfo;
  const urlHost = host.includes(':') ? `[${host}]` : host;
  return {
    url: `http://${urlHost}:${port}`,
    port,
    close: () =>
      new Promise<void>((ok) => {
        server.close(() => ok());
        server.closeAllConnections();
      }),
  };
}
