import { describe, expect, it } from 'vitest';
import { faultChangeSchema } from '../../../simulator/faults';
import { boardSpecSchema, fleetFileSchema } from '../../../simulator/spec';

const spec = { serial: 'RLY-0001', secret: 's3cret-s3cret', relayCount: 6, hasFlowSensor: true, relayFlowsLpm: { '1': 12, '2': 8 }, masterValveRelay: 6 };

describe('board specs and fleet files', () => {
  it('reads relay flows keyed by strings (JSON) as relay numbers', () => {
    const r = boardSpecSchema.parse(spec);
    expect(r.relayFlowsLpm).toEqual({ 1: 12, 2: 8 });
    expect(r.relayFlowsLpm[1]).toBe(12);
  });

  it('refuses a master valve or a flow for a relay the board does not have', () => {
    expect(boardSpecSchema.safeParse({ ...spec, masterValveRelay: 7 }).success).toBe(false);
    expect(boardSpecSchema.safeParse({ ...spec, relayFlowsLpm: { '7': 3 } }).success).toBe(false);
    expect(boardSpecSchema.safeParse({ ...spec, relayFlowsLpm: { zone: 3 } }).success).toBe(false);
  });

  it('refuses a serial the protocol would not accept', () => {
    expect(boardSpecSchema.safeParse({ ...spec, serial: 'a/b' }).success).toBe(false);
  });

  it('refuses a fleet file that names a serial twice', () => {
    expect(fleetFileSchema.safeParse({ boards: [spec, spec] }).success).toBe(false);
    expect(fleetFileSchema.safeParse({ boards: [spec, { ...spec, serial: 'RLY-0002' }] }).success).toBe(true);
  });
});

describe('fault switches', () => {
  it('needs a relay to switch a relay fault on, but not to clear it everywhere', () => {
    expect(faultChangeSchema.safeParse({ fault: 'stuck_valve', on: true }).success).toBe(false);
    expect(faultChangeSchema.safeParse({ fault: 'stuck_valve', on: true, relay: 2 }).success).toBe(true);
    expect(faultChangeSchema.safeParse({ fault: 'broken_head', on: false }).success).toBe(true);
  });

  it('needs offsetMinutes to skew the clock', () => {
    expect(faultChangeSchema.safeParse({ fault: 'clock_skew', on: true }).success).toBe(false);
    expect(faultChangeSchema.safeParse({ fault: 'clock_skew', on: true, offsetMinutes: 180 }).success).toBe(true);
  });

  it('refuses unknown faults and unknown fields', () => {
    expect(faultChangeSchema.safeParse({ fault: 'fire', on: true }).success).toBe(false);
    expect(faultChangeSchema.safeParse({ fault: 'offline', on: true, relay: 1 }).success).toBe(false);
  });
});

describe('fleet files written by other tools', () => {
  it('ignores fields a board does not need, such as a name or site', () => {
    const r = fleetFileSchema.parse({ boards: [{ ...spec, name: 'Front beds', siteId: 4 }], writtenAt: 'now' });
    expect(r.boards[0]).not.toHaveProperty('name');
    expect(r.boards[0].serial).toBe('RLY-0001');
  });
});
