/**
 * HTTP client of the weather service (our own JSON format, docs/weather.md). Plain fetch,
 * a timeout, and a zod check of every answer: a service that answers something else is an
 * error, never half-stored data.
 */
import { serviceDailyResponseSchema, type ServiceDay } from '../contracts/weather';

export class WeatherServiceError extends Error {
  constructor(
    message: string,
    readonly kind: 'unreachable' | 'bad_status' | 'bad_response',
  ) {
    super(message);
    this.name = 'WeatherServiceError';
  }
}

export type DailyRequest = { lat: number; lon: number; from: string; to: string };

export async function fetchDailyWeather(
  baseUrl: string,
  q: DailyRequest,
  opts: { timeoutMs?: number; fetch?: typeof fetch } = {},
): Promise<ServiceDay[]> {
  const url = new URL('/v1/daily', baseUrl);
  url.searchParams.set('lat', String(q.lat));
  url.searchParams.set('lon', String(q.lon));
  url.searchParams.set('from', q.from);
  url.searchParams.set('to', q.to);
  const doFetch = opts.fetch ?? fetch;
  let res: Response;
  try {
    res = await doFetch(url, { signal: AbortSignal.timeout(opts.timeoutMs ?? 10_000), headers: { accept: 'application/json' } });
  } catch (e) {
    const why = e instanceof Error && e.name === 'TimeoutError' ? 'did not answer in time' : 'could not be reached';
    throw new WeatherServiceError(`The weather service ${why}`, 'unreachable');
  }
  let body: unknown;
  try {
    body = await res.json();
  } catch {
    throw new WeatherServiceError(`The weather service answered ${res.status} without JSON`, res.ok ? 'bad_response' : 'bad_status');
  }
  if (!res.ok) {
    const detail = body && typeof body === 'object' && 'error' in body ? `: ${String((body as { error: unknown }).error)}` : '';
    throw new WeatherServiceError(`The weather service answered ${res.status}${detail}`.slice(0, 300), 'bad_status');
  }
  const parsed = serviceDailyResponseSchema.safeParse(body);
  if (!parsed.success) throw new WeatherServiceError('The weather service answered in an unexpected format', 'bad_response');
  const wanted = new Set<string>();
  for (const d of parsed.data.days) {
    if (d.date < q.from || d.date > q.to) {
      throw new WeatherServiceError(`The weather service sent ${d.date}, outside ${q.from}…${q.to}`, 'bad_response');
    }
    if (wanted.has(d.date)) throw new WeatherServiceError(`The weather service sent ${d.date} twice`, 'bad_response');
    wanted.add(d.date);
  }
  return parsed.data.days;
}
