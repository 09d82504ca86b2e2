import { z } from 'zod';

/**
 * Faults a simulated board can be given, each switched on and off on its own:
 *   offline      drop off the network (no clean disconnect, so the broker fires the last-will)
 *   no_ack       ignore commands entirely: no action, no acknowledgement
 *   stuck_valve  the valve on a relay will not close (close and failsafe fail; it stays open)
 *   broken_head  a relay's zone flows 2.5 × its nominal flow
 *   clogged      a relay's zone flows 0.3 × its nominal flow
 *   clock_skew   the board's clock is off by offsetMinutes
 *   low_voltage  the transformer sags: supply reads about 19 V
 */
export const faultNames = ['offline', 'no_ack', 'stuck_valve', 'broken_head', 'clogged', 'clock_skew', 'low_voltage'] as const;
export type FaultName = (typeof faultNames)[number];

export const BROKEN_HEAD_FLOW_FACTOR = 2.5;
export const CLOGGED_FLOW_FACTOR = 0.3;

const relay = z.number().int().min(1).max(8);
const on = z.boolean();

export const faultChangeSchema = z.discriminatedUnion('fault', [
  z.strictObject({ fault: z.literal('offline'), on }),
  z.strictObject({ fault: z.literal('no_ack'), on }),
  z.strictObject({ fault: z.literal('low_voltage'), on }),
  // Relay faults: on needs the relay; off without a relay clears the fault on every relay.
  z.strictObject({ fault: z.literal('stuck_valve'), on, relay: relay.optional() }),
  z.strictObject({ fault: z.literal('broken_head'), on, relay: relay.optional() }),
  z.strictObject({ fault: z.literal('clogged'), on, relay: relay.optional() }),
  z.strictObject({ fault: z.literal('clock_skew'), on, offsetMinutes: z.number().int().min(-7 * 24 * 60).max(7 * 24 * 60).optional() }),
]).superRefine((f, ctx) => {
  if ((f.fault === 'stuck_valve' || f.fault === 'broken_head' || f.fault === 'clogged') && f.on && f.relay === undefined)
    ctx.addIssue({ code: 'custom', path: ['relay'], message: `${f.fault} needs the relay it applies to` });
  if (f.fault === 'clock_skew' && f.on && f.offsetMinutes === undefined)
    ctx.addIssue({ code: 'custom', path: ['offsetMinutes'], message: 'clock_skew needs offsetMinutes' });
});
export type FaultChange = z.infer<typeof faultChangeSchema>;

/** The faults a board has now, as plain JSON. */
export type FaultView = {
  offline: boolean;
  no_ack: boolean;
  stuck_valve: number[];
  broken_head: number[];
  clogged: number[];
  /** Minutes the board clock is off; 0 = none. */
  clock_skew: number;
  low_voltage: boolean;
};

export class FaultState {
  offline = false;
  noAck = false;
  lowVoltage = false;
  skewMinutes = 0;
  readonly stuck = new Set<number>();
  readonly broken = new Set<number>();
  readonly clogged = new Set<number>();

  /** Flow multiplier for one relay's zone. */
  flowFactor(relay: number): number {
    return (this.broken.has(relay) ? BROKEN_HEAD_FLOW_FACTOR : 1) * (this.clogged.has(relay) ? CLOGGED_FLOW_FACTOR : 1);
  }

  view(): FaultView {
    const sorted = (s: Set<number>) => [...s].sort((a, b) => a - b);
    return {
      offline: this.offline,
      no_ack: this.noAck,
      stuck_valve: sorted(this.stuck),
      broken_head: sorted(this.broken),
      clogged: sorted(this.clogged),
      clock_skew: this.skewMinutes,
      low_voltage: this.lowVoltage,
    };
  }
}
