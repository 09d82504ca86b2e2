/** The simulator's board view, as the demo proxy passes it on (docs: simulator/control-api.ts). */
import type { FaultChange, FaultName, FaultView } from '../../simulator/faults';

export type { FaultChange, FaultName, FaultView };

export type SimRelay = { relay: number; open: boolean; since: string | null; closesAt: string | null; cmdId: string | null };

export type SimBoard = {
  serial: string;
  online: boolean;
  relayCount: number;
  hasFlowSensor: boolean;
  masterValveRelay: number | null;
  relays: SimRelay[];
  rain: boolean;
  faults: FaultView;
  latestSample: { moisturePct?: number; supplyV?: number; flowLpm?: number | null; rssi?: number } | null;
};
