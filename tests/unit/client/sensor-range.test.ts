import { describe, expect, it } from 'vitest';
import {
  customRangeSchema, rangeAround, rangeBounds, samplingWords, sensorQuerySchema, spanWords, valveSpans, withGaps,
} from '../../../src/components/sensors/sensor-range';

const T0 = Date.parse('2025-07-01T00:00:00Z');
const MIN = 60_000;
const HOUR = 60 * MIN;
const mark = (min: number, relay: number, open: boolean, zoneId: number | null = relay * 10, source = 'command') => ({
  at: new Date(T0 + min * MIN).toISOString(), relay, zoneId, open, source,
});

describe('valve spans from open and close marks', () => {
  it('pairs each relay’s open with its next close, relays apart', () => {
    const spans = valveSpans([mark(10, 1, true), mark(12, 2, true), mark(20, 1, false), mark(42, 2, false, 20, 'failsafe')], T0, T0 + HOUR);
    expect(spans).toEqual([
      { relay: 1, zoneId: 10, start: T0 + 10 * MIN, end: T0 + 20 * MIN, openedBefore: false, stillOpen: false, openedBy: 'command', closedBy: 'command' },
      { relay: 2, zoneId: 20, start: T0 + 12 * MIN, end: T0 + 42 * MIN, openedBefore: false, stillOpen: false, openedBy: 'command', closedBy: 'failsafe' },
    ]);
  });

  it('starts a close without an open at the range’s start, and runs an open without a close to its end', () => {
    const spans = valveSpans([mark(5, 3, false), mark(50, 3, true, 30, 'button')], T0, T0 + HOUR);
    expect(spans.map((s) => [s.start - T0, s.end - T0, s.openedBefore, s.stillOpen, s.openedBy, s.closedBy])).toEqual([
      [0, 5 * MIN, true, false, null, 'command'],
      [50 * MIN, HOUR, false, true, 'button', null],
    ]);
  });

  it('ignores a repeated open while the valve is open, and sorts marks given out of order', () => {
    const spans = valveSpans([mark(30, 1, false), mark(10, 1, true), mark(15, 1, true)], T0, T0 + HOUR);
    expect(spans).toHaveLength(1);
    expect([spans[0].start - T0, spans[0].end - T0]).toEqual([10 * MIN, 30 * MIN]);
  });
});

describe('gaps in a line', () => {
  it('breaks the line where points are much further apart than usual, and nowhere else', () => {
    const pts = [0, 5, 10, 15, 60, 65].map((m) => ({ t: T0 + m * MIN, v: m }));
    const out = withGaps(pts, 2 * MIN);
    expect(out.map(([t, v]) => [(t - T0) / MIN, v])).toEqual([[0, 0], [5, 5], [10, 10], [15, 15], [20, null], [60, 60], [65, 65]]);
  });

  it('keeps readings further apart than a bucket joined when that is their usual spacing', () => {
    const pts = [0, 5, 10, 15].map((m) => ({ t: T0 + m * MIN, v: m }));
    expect(withGaps(pts, 144_000).some(([, v]) => v === null)).toBe(false);
  });
});

describe('ranges', () => {
  it('ends a preset now and covers its length', () => {
    const now = T0 + 12 * HOUR;
    expect(rangeBounds({ range: '7d' }, 'America/Denver', now)).toEqual({ from: now - 7 * 24 * HOUR, to: now });
  });

  it('runs chosen days from midnight to midnight at the site (Denver is UTC−6 in July)', () => {
    const b = rangeBounds({ range: 'custom', from: '2025-07-01', to: '2025-07-02' }, 'America/Denver', T0);
    expect(new Date(b.from).toISOString()).toBe('2025-07-01T06:00:00.000Z');
    expect(new Date(b.to).toISOString()).toBe('2025-07-03T06:00:00.000Z');
  });

  it('refuses chosen days the wrong way round or longer than two years', () => {
    expect(customRangeSchema.safeParse({ from: '2025-07-02', to: '2025-07-01' }).success).toBe(false);
    expect(customRangeSchema.safeParse({ from: '2023-01-01', to: '2025-07-01' }).success).toBe(false);
    expect(customRangeSchema.safeParse({ from: '2024-07-01', to: '2025-07-01' }).success).toBe(true);
  });

  it('reads a mangled address as the default range instead of failing', () => {
    expect(sensorQuerySchema.parse({ range: 'forever', zone: 'x', from: '1 July' })).toEqual({ range: '24h', from: undefined, to: undefined, zone: undefined });
    expect(sensorQuerySchema.parse({ range: '30d', zone: '12' })).toMatchObject({ range: '30d', zone: 12 });
  });

  it('picks the shortest range that shows an alert with an hour before it', () => {
    const now = T0 + 100 * 24 * HOUR; // 2025-10-09
    expect(rangeAround(now - 6 * HOUR, now, 'UTC')).toEqual({ range: '24h' });
    expect(rangeAround(now - 23.5 * HOUR, now, 'UTC')).toEqual({ range: '7d' });
    expect(rangeAround(now - 20 * 24 * HOUR, now, 'UTC')).toEqual({ range: '30d' });
    expect(rangeAround(now - 400 * 24 * HOUR, now, 'UTC')).toEqual({ range: 'custom', from: '2024-09-03', to: '2024-09-05' });
  });
});

describe('words', () => {
  it('names bucket lengths the way people say them', () => {
    expect([1000, 90_000, 144_000, 240_000, 1_008_000, 2 * HOUR, 25 * HOUR, 72 * HOUR].map(spanWords)).toEqual([
      '1 s', '90 s', '2 min 24 s', '4 min', '17 min', '2 h', '25 h', '3 days',
    ]);
  });

  it('says a range is downsampled only when some point stands for more than one reading', () => {
    expect(samplingWords(144_000, 1)).toBeNull();
    expect(samplingWords(144_000, 2)).toContain('one point per 2 min 24 s, the average of up to 2 readings');
  });
});
