/**
 * Invented, deterministic daily weather for any place and date: the local fake weather
 * service and the demo seed both use it. Nothing here is real data. The same (lat, lon,
 * date) always gives the same day, whatever range it is asked in, because every random
 * draw is a hash of the place, the day and a channel name, and the slow-moving parts
 * (warm and cold spells, wet and dry periods, windy days) are smooth noise over the day
 * number.
 */
import { dayOfYear, daylightHours } from '../domain/agronomy';

export type GeneratedDay = {
  date: string;
  tmaxC: number;
  tminC: number;
  rhMaxPct: number;
  rhMinPct: number;
  /** Wind speed at windHeightM (the service reports 10 m, as weather stations do). */
  windMs: number;
  windHeightM: number;
  sunshineH: number;
  rainMm: number;
};

/** Force a day dry (no rain, clear, warm) or wet (a rain event), e.g. for the demo scenario. */
export type Regime = 'dry' | 'wet';

export type GenerateOptions = { regime?: (date: string) => Regime | undefined };

const DAY_MS = 86_400_000;

/** 32-bit FNV-1a hash of a string, then an avalanche mix; returns a number in [0, 1). */
function unit(key: string): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < key.length; i++) {
    h ^= key.charCodeAt(i);
    h = Math.imul(h, 0x01000193);
  }
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return (h >>> 0) / 4294967296;
}

/** Smooth noise in [−1, 1] over t (value noise with smoothstep between whole t). */
function smooth(place: string, channel: string, t: number): number {
  const i = Math.floor(t);
  const f = t - i;
  const a = unit(`${place}|${channel}|${i}`) * 2 - 1;
  const b = unit(`${place}|${channel}|${i + 1}`) * 2 - 1;
  const s = f * f * (3 - 2 * f);
  return a + (b - a) * s;
}

const round1 = (x: number) => Math.round(x * 10) / 10;
const clamp = (x: number, lo: number, hi: number) => Math.min(hi, Math.max(lo, x));

export function dayNumber(isoDate: string): number {
  const [y, m, d] = isoDate.split('-').map(Number);
  return Math.round(Date.UTC(y, m - 1, d) / DAY_MS);
}

export function isoFromDayNumber(n: number): string {
  return new Date(n * DAY_MS).toISOString().slice(0, 10);
}

/** Every date from `from` to `to`, inclusive. */
export function datesBetween(from: string, to: string): string[] {
  const out: string[] = [];
  for (let n = dayNumber(from); n <= dayNumber(to); n++) out.push(isoFromDayNumber(n));
  return out;
}

/** One invented day of weather at a place (places closer than ~1 km share their weather). */
export function generateDay(latitudeDeg: number, longitudeDeg: number, date: string, opts: GenerateOptions = {}): GeneratedDay {
  const place = `${latitudeDeg.toFixed(2)},${longitudeDeg.toFixed(2)}`;
  const n = dayNumber(date);
  const doy = dayOfYear(date);
  const r = (channel: string) => unit(`${place}|${channel}|${n}`);
  const absLat = Math.abs(latitudeDeg);

  // Season: warmest around 19 July in the north, 19 January in the south.
  const peak = latitudeDeg >= 0 ? 200 : 17;
  const season = Math.cos((2 * Math.PI * (doy - peak)) / 365.25); // 1 midsummer … −1 midwinter
  const annualMean = 27 - 0.55 * Math.max(0, absLat - 12);
  const amplitude = Math.min(15, 1 + 0.28 * absLat);

  // Wet and dry periods last days to a couple of weeks; rain is likelier in the cool season.
  const regime = opts.regime?.(date);
  const wetness = 0.7 * smooth(place, 'wet', n / 6) + 0.3 * smooth(place, 'wet-fast', n / 2) - 0.1 * season;
  let rainy = wetness > 0.28 && r('rain-chance') < 0.75;
  if (regime === 'dry') rainy = false;
  if (regime === 'wet') rainy = true;
  let rainMm = 0;
  if (rainy) {
    const u = r('rain-amount');
    rainMm = clamp(-Math.log(1 - u * 0.995) * (4 + 6 * Math.max(0, wetness)), 0.2, 65);
    if (regime === 'wet') rainMm = Math.max(rainMm, 6 + 10 * u);
  }

  const warmSpell = 3.5 * smooth(place, 'temp', n / 5) + 1.2 * (r('temp-day') * 2 - 1) + (regime === 'dry' ? 2 : 0);
  const mean = annualMean + amplitude * season + warmSpell - (rainy ? 2 : 0);
  const range = rainy ? 5 + 3 * r('range') : 9 + 4 * r('range') + (absLat < 30 ? 0 : 1.5 * Math.max(0, season));
  const tmaxC = round1(clamp(mean + range / 2, -55, 52));
  const tminC = round1(Math.min(tmaxC, clamp(mean - range / 2, -80, 40)));

  const rhMaxPct = Math.round(clamp((rainy ? 92 : 72) + 12 * r('rh-max') + 4 * wetness, 35, 100));
  const rhMinPct = Math.round(clamp((rainy ? 62 : 24) + 18 * r('rh-min') + 8 * wetness - (regime === 'dry' ? 6 : 0), 8, rhMaxPct));

  const windy = smooth(place, 'wind', n / 3);
  const windMs = round1(clamp(3.2 + 1.6 * windy + 1.2 * (r('wind-day') * 2 - 1) + (rainy ? 1.2 : 0), 0.3, 20));

  const bigN = daylightHours(latitudeDeg, doy);
  const cloudFree = rainy ? 0.05 + 0.3 * r('sun') : 0.55 + 0.4 * r('sun') + (regime === 'dry' ? 0.05 : 0);
  const sunshineH = round1(clamp(bigN * Math.min(1, cloudFree), 0, Math.floor(bigN * 10) / 10));

  return { date, tmaxC, tminC, rhMaxPct, rhMinPct, windMs, windHeightM: 10, sunshineH, rainMm: round1(rainMm) };
}

/** Invented days for every date from `from` to `to`, inclusive. */
export function generateDays(
  latitudeDeg: number,
  longitudeDeg: number,
  from: string,
  to: string,
  opts: GenerateOptions = {},
): GeneratedDay[] {
  return datesBetween(from, to).map((d) => generateDay(latitudeDeg, longitudeDeg, d, opts));
}
