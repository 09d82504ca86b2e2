import { describe, expect, it } from 'vitest';
import { Outbox, type Outgoing } from '../../../simulator/outbox';

const tele = (n: number): Outgoing => ({ kind: 'telemetry', topic: 't', payload: `t${n}`, retain: false, samples: 5 });
const evt = (n: number): Outgoing => ({ kind: 'event', topic: 'e', payload: `e${n}`, retain: false, samples: 0 });

describe('offline buffer', () => {
  it('gives back everything in the order it was queued, then is empty', () => {
    const o = new Outbox(10);
    o.push(tele(1));
    o.push(evt(2));
    o.push(tele(3));
    expect(o.samplesQueued).toBe(10);
    expect(o.drain().map((m) => m.payload)).toEqual(['t1', 'e2', 't3']);
    expect(o.size).toBe(0);
    expect(o.samplesQueued).toBe(0);
  });

  it('drops the oldest telemetry first when full, keeps valve events, and counts what it dropped', () => {
    const o = new Outbox(3);
    o.push(evt(1));
    o.push(tele(2));
    o.push(tele(3));
    o.push(tele(4));
    o.push(evt(5));
    expect(o.drain().map((m) => m.payload)).toEqual(['e1', 't4', 'e5']);
    expect(o.dropped).toBe(2);
    expect(o.samplesDropped).toBe(10);
  });

  it('drops the oldest message when only events are left', () => {
    const o = new Outbox(2);
    for (const i of [1, 2, 3]) o.push(evt(i));
    expect(o.drain().map((m) => m.payload)).toEqual(['e2', 'e3']);
    expect(o.dropped).toBe(1);
  });
});
