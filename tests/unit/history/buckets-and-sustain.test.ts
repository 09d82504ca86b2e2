import { describe, expect, it } from 'vitest';
import { Sustain, flowVerdict, voltageLow } from '../../../server/alerts/sustain';
import { basisOf, bucketStart } from '../../../server/history/water-use';
import { dateRange } from '../../../server/history/sql';

describe('water-use buckets', () => {
  it('start weeks on Monday and months on the 1st', () => {
    expect(bucketStart('2025-07-10', 'day')).toBe('2025-07-10');
    expect(bucketStart('2025-07-10', 'week')).toBe('2025-07-07');
    expect(bucketStart('2025-07-06', 'week')).toBe('2025-06-30');
    expect(bucketStart('2025-07-31', 'month')).toBe('2025-07-01');
  });

  it('label litres by where they came from', () => {
    expect(basisOf(0, 0, 0)).toBe('none');
    expect(basisOf(10, 0, 1)).toBe('measured');
    expect(basisOf(0, 10, 1)).toBe('estimated');
    expect(basisOf(5, 5, 2)).toBe('mixed');
  });

  it('list every day of a range, across a month end', () => {
    expect(dateRange('2025-02-27', '2025-03-02')).toEqual(['2025-02-27', '2025-02-28', '2025-03-01', '2025-03-02']);
  });
});

describe('a sustained condition', () => {
  it('is raised once after holding long enough, and resolved after being gone long enough', () => {
    const s = new Sustain();
    expect(s.observe('k', true, 0, 100, 50)).toBe(null);
    expect(s.observe('k', true, 99, 100, 50)).toBe(null);
    expect(s.observe('k', true, 100, 100, 50)).toBe('raise');
    expect(s.observe('k', true, 500, 100, 50)).toBe(null);
    expect(s.observe('k', false, 600, 100, 50)).toBe(null);
    expect(s.observe('k', true, 610, 100, 50)).toBe(null); // came back: the clearing starts again
    expect(s.observe('k', false, 620, 100, 50)).toBe(null);
    expect(s.observe('k', false, 670, 100, 50)).toBe('resolve');
    expect(s.live.has('k')).toBe(false);
  });

  it('starts over when it cannot tell, but never resolves on not knowing', () => {
    const s = new Sustain();
    s.observe('k', true, 0, 100, 0);
    s.observe('k', null, 50, 100, 0);
    expect(s.observe('k', true, 120, 100, 0)).toBe(null);
    expect(s.observe('k', true, 220, 100, 0)).toBe('raise');
    expect(s.observe('k', null, 300, 100, 0)).toBe(null);
    expect(s.live.has('k')).toBe(true);
  });

  it('judges flow and voltage with the configured ratios and half a volt of hysteresis', () => {
    expect(flowVerdict(75, 30, 1.5, 0.5)).toBe('high');
    expect(flowVerdict(9, 30, 1.5, 0.5)).toBe('low');
    expect(flowVerdict(31, 30, 1.5, 0.5)).toBe('normal');
    expect(voltageLow(21, 21.5, false)).toBe(true);
    expect(voltageLow(21.7, 21.5, true)).toBe(true);
    expect(voltageLow(21.7, 21.5, false)).toBe(false);
    expect(voltageLow(22, 21.5, true)).toBe(false);
  });
});
