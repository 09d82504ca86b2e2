import type { Ack, BoardEvent, BoardStatus, Command, RelayState, Telemetry } from '../server/contracts/protocol';

/** What the gateway tells the server, in domain terms. Each promise resolves once the fact is stored. */
export interface DeviceSink {
  /** Check a board's credentials; resolves to its highest stored sequence number, or null to refuse. */
  authenticate(serial: string, secret: string): Promise<{ lastSeq: number } | null>;
  online(serial: string, status: BoardStatus, receivedAt: Date): Promise<void>;
  offline(serial: string, reason: 'last-will' | 'disconnect' | 'silence', at: Date): Promise<void>;
  relayChanged(serial: string, e: BoardEvent, receivedAt: Date): Promise<void>;
  relayState(serial: string, s: RelayState, receivedAt: Date): Promise<void>;
  acknowledged(serial: string, a: Ack, receivedAt: Date): Promise<void>;
  /** A telemetry message's samples, in either of its forms (sample objects or columns). */
  samples(serial: string, seq: number, t: Telemetry, receivedAt: Date): Promise<void>;
  /** A sequence gap: `missing` messages never arrived. */
  gap(serial: string, missing: number): void;
}

export type DropReason = 'malformed' | 'oversized' | 'duplicate' | 'unknown_topic' | 'acl_publish' | 'acl_subscribe' | 'bad_credentials';

export type GatewayStats = {
  received: number;
  accepted: number;
  dropped: Record<DropReason, number>;
  gaps: number;
  commandsSent: number;
};

/** The shape every kind of relay board is driven through; a new kind of board is a new file. */
export interface BoardDriver {
  readonly name: string;
  commandTopic(serial: string): string;
  encodeCommand(cmd: Command): Buffer;
  /** Where and how the server tells a board which of its messages are stored. */
  receiptTopic(serial: string): string;
  encodeReceipt(seqs: number[]): Buffer;
}
