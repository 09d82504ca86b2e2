import { describe, expect, it } from 'vitest';
import { daylightHours, dayOfYear, referenceEt0 } from '../../../server/domain/agronomy';
import { datesBetween, generateDay, generateDays } from '../../../server/weather/generator';

const DENVER = [39.7392, -104.9903] as const;
const SYDNEY = [-33.87, 151.21] as const;

const mean = (xs: number[]) => xs.reduce((a, b) => a + b, 0) / xs.length;
function longestDryRun(days: { rainMm: number }[]) {
  let best = 0;
  let cur = 0;
  for (const d of days) {
    cur = d.rainMm > 0 ? 0 : cur + 1;
    best = Math.max(best, cur);
  }
  return best;
}

describe('the invented weather generator', () => {
  it('gives the same day for the same place and date, whatever range it is asked in', () => {
    const alone = generateDay(...DENVER, '2025-07-04');
    const inRange = generateDays(...DENVER, '2025-06-20', '2025-07-10').find((d) => d.date === '2025-07-04');
    expect(inRange).toEqual(alone);
    expect(generateDay(...DENVER, '2025-07-04')).toEqual(alone);
  });

  it('gives different weather at places far apart', () => {
    expect(generateDay(...DENVER, '2025-07-04')).not.toEqual(generateDay(41.75, -88.15, '2025-07-04'));
  });

  it('follows the seasons by hemisphere: Denver is warmer in July, Sydney in January', () => {
    const month = (p: readonly [number, number], m: string) => mean(generateDays(...p, `2025-${m}-01`, `2025-${m}-28`).map((d) => d.tmaxC));
    expect(month(DENVER, '07') - month(DENVER, '01')).toBeGreaterThan(15);
    expect(month(SYDNEY, '01') - month(SYDNEY, '07')).toBeGreaterThan(10);
  });

  it('keeps every value physically possible and usable by referenceEt0', () => {
    for (const [lat, lon] of [DENVER, SYDNEY, [64.1, -21.9], [1.3, 103.8], [-54.8, -68.3]] as const) {
      for (const d of generateDays(lat, lon, '2024-01-01', '2024-12-31')) {
        expect(d.tminC).toBeLessThanOrEqual(d.tmaxC);
        expect(d.rhMinPct).toBeLessThanOrEqual(d.rhMaxPct);
        expect(d.rhMaxPct).toBeLessThanOrEqual(100);
        expect(d.windMs).toBeGreaterThanOrEqual(0);
        expect(d.rainMm).toBeGreaterThanOrEqual(0);
        expect(d.sunshineH).toBeLessThanOrEqual(daylightHours(lat, dayOfYear(d.date)) + 0.1);
        const et0 = referenceEt0({
          tmaxC: d.tmaxC, tminC: d.tminC, rhMaxPct: d.rhMaxPct, rhMinPct: d.rhMinPct, windSpeedMs: d.windMs,
          windHeightM: d.windHeightM, sunshineHours: d.sunshineH, latitudeDeg: lat, elevationM: 100, dayOfYear: dayOfYear(d.date),
        });
        expect(Number.isFinite(et0)).toBe(true);
      }
    }
  });

  it('has rain events and dry spells over a year', () => {
    const year = generateDays(...DENVER, '2025-01-01', '2025-12-31');
    const rainy = year.filter((d) => d.rainMm > 0).length;
    expect(rainy).toBeGreaterThan(30);
    expect(rainy).toBeLessThan(180);
    expect(longestDryRun(year)).toBeGreaterThanOrEqual(10);
  });

  it('gives a plausible summer ET₀ for Denver (about 5 to 8 mm a day in July)', () => {
    const july = generateDays(...DENVER, '2025-07-01', '2025-07-31').map((d) =>
      referenceEt0({
        tmaxC: d.tmaxC, tminC: d.tminC, rhMaxPct: d.rhMaxPct, rhMinPct: d.rhMinPct, windSpeedMs: d.windMs, windHeightM: 10,
        sunshineHours: d.sunshineH, latitudeDeg: DENVER[0], elevationM: 1609, dayOfYear: dayOfYear(d.date),
      }),
    );
    expect(mean(july)).toBeGreaterThan(5);
    expect(mean(july)).toBeLessThan(8);
  });

  it('obeys a forced regime: no rain on dry days, rain on wet days', () => {
    const days = generateDays(...DENVER, '2025-03-01', '2025-03-30', {
      regime: (d) => (d <= '2025-03-10' ? 'wet' : d >= '2025-03-15' ? 'dry' : undefined),
    });
    expect(days.slice(0, 10).every((d) => d.rainMm >= 6)).toBe(true);
    expect(days.slice(14).every((d) => d.rainMm === 0)).toBe(true);
  });

  it('lists dates across a leap day and a year end', () => {
    expect(datesBetween('2024-02-28', '2024-03-01')).toEqual(['2024-02-28', '2024-02-29', '2024-03-01']);
    expect(datesBetween('2025-12-31', '2026-01-01')).toEqual(['2025-12-31', '2026-01-01']);
  });
});
