import { z } from 'zod';
import { serialSchema } from '../server/contracts/protocol';

/** What one simulated relay board is: the same facts the server keeps about a controller. */
export type BoardSpec = {
  serial: string;
  secret: string;
  relayCount: number;
  hasFlowSensor: boolean;
  /** Nominal flow (L/min) of the zone behind each relay; relays without an entry carry none. */
  relayFlowsLpm: Record<number, number>;
  masterValveRelay?: number | null;
  firmware?: string;
};

const relayKey = z.string().regex(/^[1-8]$/).transform(Number);

// Plain objects (unknown keys stripped): a fleet file may carry more about a controller than a board needs.
export const boardSpecSchema = z
  .object({
    serial: serialSchema,
    secret: z.string().min(1).max(200),
    relayCount: z.number().int().min(1).max(8),
    hasFlowSensor: z.boolean(),
    // JSON object keys are strings; accept "1": 12.5 and turn the keys back into relay numbers.
    relayFlowsLpm: z.record(z.string(), z.number().min(0).max(5000)).transform((rec, ctx) => {
      const out: Record<number, number> = {};
      for (const [k, flow] of Object.entries(rec)) {
        const r = relayKey.safeParse(k);
        if (!r.success) {
          ctx.addIssue({ code: 'custom', message: `relay "${k}" must be 1–8`, path: [k] });
          continue;
        }
        out[r.data] = flow;
      }
      return out;
    }),
    masterValveRelay: z.number().int().min(1).max(8).nullable().optional(),
    firmware: z.string().min(1).max(32).optional(),
  })
  .refine((s) => s.masterValveRelay == null || s.masterValveRelay <= s.relayCount, {
    message: 'The master valve relay must exist on the board',
    path: ['masterValveRelay'],
  })
  .refine((s) => Object.keys(s.relayFlowsLpm).every((k) => Number(k) <= s.relayCount), {
    message: 'relayFlowsLpm names a relay the board does not have',
    path: ['relayFlowsLpm'],
  });

/** The fleet file: `{ "boards": BoardSpec[] }` (written by the demo seed to .data/demo-fleet.json). */
export const fleetFileSchema = z
  .object({ boards: z.array(boardSpecSchema) })
  .refine((f) => new Set(f.boards.map((b) => b.serial)).size === f.boards.length, {
    message: 'Serials in a fleet file must be unique',
    path: ['boards'],
  });
export type FleetFile = z.infer<typeof fleetFileSchema>;
