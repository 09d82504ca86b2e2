import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startFakeWeatherService, type FakeWeatherService } from '../../../server/weather/fake-service';
import { fetchDailyWeather, WeatherServiceError } from '../../../server/weather/client';
import { generateDay } from '../../../server/weather/generator';
import { loadWeatherConfig } from '../../../server/weather/config';

let fake: FakeWeatherService;
beforeAll(async () => {
  fake = await startFakeWeatherService({ port: 0 });
});
afterAll(async () => {
  await fake.close();
});

/** A one-off HTTP server answering every request with the given status and body. */
async function stub(status: number, body: string) {
  const server = http.createServer((_req, res) => {
    res.writeHead(status, { 'content-type': 'application/json' });
    res.end(body);
  });
  await new Promise<void>((ok) => server.listen(0, '127.0.0.1', ok));
  const url = `http://127.0.0.1:${(server.address() as AddressInfo).port}`;
  return { url, close: () => new Promise<void>((ok) => server.close(() => ok())) };
}

describe('the fake weather service', () => {
  it('answers GET /v1/daily with one invented day per date, the same as the generator', async () => {
    const res = await fetch(`${fake.url}/v1/daily?lat=39.74&lon=-104.99&from=2025-07-01&to=2025-07-03`);
    expect(res.status).toBe(200);
    const body = await res.json();
    expect(body.version).toBe(1);
    expect(body.location).toEqual({ lat: 39.74, lon: -104.99 });
    expect(body.days.map((d: { date: string }) => d.date)).toEqual(['2025-07-01', '2025-07-02', '2025-07-03']);
    expect(body.days[1]).toEqual({ ...generateDay(39.74, -104.99, '2025-07-02'), solarMj: null });
  });

  it.each([
    ['a latitude beyond 90°', 'lat=95&lon=0&from=2025-01-01&to=2025-01-02'],
    ['a range that runs backwards', 'lat=10&lon=0&from=2025-01-05&to=2025-01-02'],
    ['a date that does not exist', 'lat=10&lon=0&from=2025-02-30&to=2025-03-02'],
    ['more than two years at once', 'lat=10&lon=0&from=2020-01-01&to=2025-01-01'],
    ['no longitude', 'lat=10&from=2025-01-01&to=2025-01-02'],
  ])('refuses %s with 400 and a message', async (_what, query) => {
    const res = await fetch(`${fake.url}/v1/daily?${query}`);
    expect(res.status).toBe(400);
    expect((await res.json()).error).toEqual(expect.any(String));
  });

  it('answers 404 to an unknown path', async () => {
    expect((await fetch(`${fake.url}/v2/hourly`)).status).toBe(404);
  });
});

describe('the weather service client', () => {
  it('returns the checked days of the fake service', async () => {
    const days = await fetchDailyWeather(fake.url, { lat: 38.58, lon: -121.49, from: '2025-05-01', to: '2025-05-07' });
    expect(days).toHaveLength(7);
    expect(days[0]).toMatchObject(generateDay(38.58, -121.49, '2025-05-01'));
  });

  it('reports a service that cannot be reached as unreachable', async () => {
    const gone = await startFakeWeatherService({ port: 0 });
    await gone.close();
    await expect(fetchDailyWeather(gone.url, { lat: 0, lon: 0, from: '2025-01-01', to: '2025-01-01' })).rejects.toMatchObject({
      name: 'WeatherServiceError', kind: 'unreachable',
    });
  });

  it('reports an error status with the service’s own message', async () => {
    const s = await stub(503, JSON.stringify({ error: 'maintenance' }));
    try {
      const err = await fetchDailyWeather(s.url, { lat: 0, lon: 0, from: '2025-01-01', to: '2025-01-01' }).catch((e) => e);
      expect(err).toBeInstanceOf(WeatherServiceError);
      expect(err.kind).toBe('bad_status');
      expect(err.message).toMatch(/503: maintenance/);
    } finally {
      await s.close();
    }
  });

  it.each([
    ['not JSON', 'hello'],
    ['another format', JSON.stringify({ daily: [] })],
    ['a day outside the range', JSON.stringify({ version: 1, location: { lat: 0, lon: 0 }, days: [{ date: '2025-02-01', tmaxC: 1, tminC: 0 }] })],
    ['a day twice', JSON.stringify({ version: 1, location: { lat: 0, lon: 0 }, days: [{ date: '2025-01-01', tmaxC: 1, tminC: 0 }, { date: '2025-01-01', tmaxC: 1, tminC: 0 }] })],
  ])('refuses an answer that is %s as a bad response', async (_what, body) => {
    const s = await stub(200, body);
    try {
      await expect(fetchDailyWeather(s.url, { lat: 0, lon: 0, from: '2025-01-01', to: '2025-01-01' })).rejects.toMatchObject({ kind: 'bad_response' });
    } finally {
      await s.close();
    }
  });
});

describe('weather settings', () => {
  it('default to the local fake on port 3902', () => {
    expect(loadWeatherConfig({})).toMatchObject({ WEATHER_PORT: 3902, WEATHER_URL: 'http://127.0.0.1:3902', WEATHER_TIMEOUT_MS: 10_000 });
  });

  it('let a later source win and ignore empty values', () => {
    const c = loadWeatherConfig({ WEATHER_URL: 'http://weather.example:8080' }, { WEATHER_URL: '', WEATHER_PORT: 0 });
    expect(c).toMatchObject({ WEATHER_URL: 'http://weather.example:8080', WEATHER_PORT: 0 });
  });

  it('refuse a WEATHER_URL that is not http(s), naming it', () => {
    expect(() => loadWeatherConfig({ WEATHER_URL: 'ftp://x' })).toThrow(/WEATHER_URL/);
  });
});
