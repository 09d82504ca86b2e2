import type { MessageKind } from '../server/contracts/protocol';

/** A board→server message. Its seq and at are fixed when it is made; the text is written then or, for valve messages, when it is handed over. */
export type Outgoing = {
  kind: Exclude<MessageKind, 'cmd' | 'stored'>;
  topic: string;
  payload: string | (() => string);
  retain: boolean;
  /** Sensor samples it carries (telemetry only). */
  samples: number;
  /** Its sequence number, for the messages the server confirms with a receipt (telemetry and events). */
  seq?: number;
};

/**
 * The board's own offline buffer: messages wait here, in order, while the board has no link.
 * Bounded; when full, the oldest telemetry goes first (valve events and acks are kept while
 * any telemetry remains), and everything dropped is counted.
 */
export class Outbox {
  private items: Outgoing[] = [];
  dropped = 0;
  samplesDropped = 0;
  samplesQueued = 0;

  constructor(readonly limit: number) {}

  get size(): number {
    return this.items.length;
  }

  push(m: Outgoing): void {
    this.items.push(m);
    this.samplesQueued += m.samples;
    while (this.items.length > this.limit) {
      let i = this.items.findIndex((x) => x.kind === 'telemetry');
      if (i < 0) i = 0;
      const [gone] = this.items.splice(i, 1);
      this.dropped++;
      this.samplesDropped += gone.samples;
      this.samplesQueued -= gone.samples;
    }
  }

  /** Everything waiting, oldest first; the buffer is empty afterwards. */
  drain(): Outgoing[] {
    const all = this.items;
    this.items = [];
    this.samplesQueued = 0;
    return all;
  }
}
