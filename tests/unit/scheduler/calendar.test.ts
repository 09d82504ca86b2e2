import { describe, expect, it } from 'vitest';
import { DateTime } from 'luxon';
import { dayRestriction, occurrences, programCrons, windowConflict, type ProgramCalendar } from '../../../server/scheduler/calendar';

const tz = 'America/Denver';
const at = (iso: string) => DateTime.fromISO(iso, { zone: tz }).toMillis();
const local = (t: number) => DateTime.fromMillis(t, { zone: tz }).toFormat("yyyy-LL-dd HH:mm ZZZZ");
const daily = (times: string[]): ProgramCalendar => ({ startTimes: times, dayRule: { kind: 'weekdays', weekdays: [0, 1, 2, 3, 4, 5, 6] }, activeFrom: null, activeTo: null });

describe('program calendar', () => {
  it('writes one cron expression per start time', () => {
    expect(programCrons({ ...daily(['05:30', '21:15']), dayRule: { kind: 'weekdays', weekdays: [5, 1, 3] } })).toEqual(['30 5 * * 1,3,5', '15 21 * * 1,3,5']);
    expect(programCrons({ ...daily(['04:00']), dayRule: { kind: 'odd' } })).toEqual(['0 4 1-31/2 * *']);
  });

  it('runs a start inside the hour skipped in spring once, an hour later by the wall clock', () => {
    // America/Denver springs forward at 02:00 on 8 March 2026: 02:30 does not exist that day.
    const got = occurrences(daily(['02:30']), tz, at('2026-03-07T00:00'), at('2026-03-09T23:59'));
    expect(got.map(local)).toEqual(['2026-03-07 02:30 MST', '2026-03-08 03:30 MDT', '2026-03-09 02:30 MDT']);
  });

  it('runs a start inside the hour repeated in autumn once', () => {
    // America/Denver falls back at 02:00 on 1 November 2026: 01:30 happens twice.
    const got = occurrences(daily(['01:30']), tz, at('2026-10-31T00:00'), at('2026-11-02T23:59'));
    expect(got).toHaveLength(3);
    expect(got.map(local)[1]).toMatch(/^2026-11-01 01:30/);
    expect(new Set(got.map((t) => DateTime.fromMillis(t, { zone: tz }).toISODate())).size).toBe(3);
  });

  it('keeps a 05:00 start at 05:00 local across the change, 24 h or 23/25 h apart in UTC', () => {
    const got = occurrences(daily(['05:00']), tz, at('2026-03-07T00:00'), at('2026-03-09T23:59'));
    expect(got.map(local)).toEqual(['2026-03-07 05:00 MST', '2026-03-08 05:00 MDT', '2026-03-09 05:00 MDT']);
    expect((got[1] - got[0]) / 3_600_000).toBe(23);
  });

  it('runs odd-day and even-day programs on the right dates', () => {
    const odd = occurrences({ ...daily(['06:00']), dayRule: { kind: 'odd' } }, tz, at('2026-07-29T00:00'), at('2026-08-03T23:00'));
    expect(odd.map((t) => DateTime.fromMillis(t, { zone: tz }).day)).toEqual([29, 31, 1, 3]);
    const even = occurrences({ ...daily(['06:00']), dayRule: { kind: 'even' } }, tz, at('2026-07-29T00:00'), at('2026-08-03T23:00'));
    expect(even.map((t) => DateTime.fromMillis(t, { zone: tz }).day)).toEqual([30, 2]);
  });

  it('runs every third day from the anchor date', () => {
    const c: ProgramCalendar = { ...daily(['06:00']), dayRule: { kind: 'interval', everyDays: 3, anchorDate: '2026-06-01' } };
    const got = occurrences(c, tz, at('2026-06-01T00:00'), at('2026-06-10T23:00'));
    expect(got.map((t) => DateTime.fromMillis(t, { zone: tz }).day)).toEqual([1, 4, 7, 10]);
  });

  it('respects the active date range', () => {
    const c: ProgramCalendar = { ...daily(['06:00']), activeFrom: '2026-06-03', activeTo: '2026-06-04' };
    expect(occurrences(c, tz, at('2026-06-01T00:00'), at('2026-06-10T00:00'))).toHaveLength(2);
  });
});

describe('site restrictions', () => {
  const r = { dayRule: 'weekdays' as const, weekdays: [1, 3, 5], noWateringWindows: [{ startMinute: 600, endMinute: 1080 }] };

  it('refuses days that are not allowed and names them', () => {
    expect(dayRestriction(r, at('2026-12-02T05:00'), tz)).toBe('No watering on Wednesdays at this site'.replace('Wednesdays', 'Wednesdays') && null);
    expect(dayRestriction(r, at('2026-12-01T05:00'), tz)).toBe('No watering on Tuesdays at this site');
    expect(dayRestriction({ ...r, dayRule: 'odd' }, at('2026-12-02T05:00'), tz)).toMatch(/odd days/);
    expect(dayRestriction({ ...r, dayRule: 'even' }, at('2026-12-02T05:00'), tz)).toBeNull();
  });

  it('finds a run that reaches into a no-watering window', () => {
    expect(windowConflict(r, at('2026-12-01T09:30'), at('2026-12-01T09:59'), tz)).toBeNull();
    expect(windowConflict(r, at('2026-12-01T09:30'), at('2026-12-01T10:15'), tz)).toBe('No watering between 10:00 and 18:00 at this site');
    expect(windowConflict(r, at('2026-12-01T12:00'), at('2026-12-01T12:10'), tz)).toMatch(/10:00 and 18:00/);
  });

  it('handles a window that runs past midnight', () => {
    const night = { dayRule: 'any' as const, weekdays: [], noWateringWindows: [{ startMinute: 1380, endMinute: 240 }] };
    expect(windowConflict(night, at('2026-12-01T23:30'), at('2026-12-01T23:40'), tz)).toMatch(/23:00 and 04:00/);
    expect(windowConflict(night, at('2026-12-01T04:00'), at('2026-12-01T04:30'), tz)).toBeNull();
  });
});
