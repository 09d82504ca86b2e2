import { describe, expect, it } from 'vitest';
import { ManualClock } from '../../../simulator/clock';

describe('manual clock', () => {
  it('runs timers in time order, each at its own due time', () => {
    const c = new ManualClock(1000);
    const seen: [string, number][] = [];
    c.setTimeout(() => seen.push(['b', c.now()]), 200);
    c.setTimeout(() => seen.push(['a', c.now()]), 100);
    c.advance(150);
    expect(seen).toEqual([['a', 1100]]);
    c.advance(100);
    expect(seen).toEqual([['a', 1100], ['b', 1200]]);
    expect(c.now()).toBe(1250);
  });

  it('runs timers set while advancing when they fall within the advance', () => {
    const c = new ManualClock(0);
    const ticks: number[] = [];
    const tick = () => {
      ticks.push(c.now());
      c.setTimeout(tick, 100);
    };
    c.setTimeout(tick, 100);
    c.advance(450);
    expect(ticks).toEqual([100, 200, 300, 400]);
    expect(c.pending).toBe(1);
  });

  it('never runs a cleared timer', () => {
    const c = new ManualClock(0);
    let ran = false;
    const h = c.setTimeout(() => (ran = true), 10);
    c.clearTimeout(h);
    c.advance(100);
    expect(ran).toBe(false);
  });

  it('runs timers due at the same moment in the order they were set', () => {
    const c = new ManualClock(0);
    const order: number[] = [];
    for (const i of [1, 2, 3]) c.setTimeout(() => order.push(i), 50);
    c.advance(50);
    expect(order).toEqual([1, 2, 3]);
  });
});
