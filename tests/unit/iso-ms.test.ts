import { describe, expect, it } from 'vitest';
import { isoFromMs } from '../../server/contracts/iso-ms';
import { Rng } from '../../simulator/prng';

describe('isoFromMs', () => {
  it('writes what Date#toISOString writes, across minutes, days, leap days and years', () => {
    const rng = new Rng(11);
    const edges = [0, 59_999, 60_000, Date.UTC(2024, 1, 29, 23, 59, 59, 999), Date.UTC(2026, 11, 31, 23, 59, 59, 999), Date.UTC(2027, 0, 1), Date.UTC(9999, 11, 31, 23, 59, 59, 999)];
    const times = [...edges, ...Array.from({ length: 20_000 }, () => Math.floor(rng.float() * Date.UTC(2100, 0, 1)))];
    // the same minute many times over, as a batch of samples gives it
    for (let ms = Date.UTC(2026, 11, 3, 10, 0, 0); ms < Date.UTC(2026, 11, 3, 10, 2, 0); ms += 7) times.push(ms);
    for (const ms of times) expect(isoFromMs(ms)).toBe(new Date(ms).toISOString());
  });
  it('drops a fraction of a millisecond as Date does, and hands years outside 1970–9999 to Date', () => {
    expect(isoFromMs(1_700_000_000_123.9)).toBe(new Date(1_700_000_000_123.9).toISOString());
    expect(isoFromMs(-1)).toBe('1969-12-31T23:59:59.999Z');
    expect(isoFromMs(Date.UTC(10000, 0, 1))).toBe('+010000-01-01T00:00:00.000Z');
  });
});
