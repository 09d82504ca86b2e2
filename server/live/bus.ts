import { EventEmitter } from 'node:events';
import type { LiveEvent } from './events';

/**
 * Fan-out of domain events. `subscribe` sees the events this instance produced (alerts,
 * rollups, webhooks: each event is handled once, by the instance that ingested it);
 * `subscribeAll` also sees events relayed from other instances (the browser hub).
 * With several instances, a relay (server/live/pg-relay.ts) forwards through PostgreSQL
 * LISTEN/NOTIFY.
 */
export class LiveBus {
  private ee = new EventEmitter();
  /** Set by a relay: called with every event this instance publishes. */
  outbound: ((e: LiveEvent) => void) | null = null;

  constructor() {
    this.ee.setMaxListeners(0);
  }
  publish(e: LiveEvent): void {
    this.ee.emit('local', e);
    this.ee.emit('all', e);
    this.outbound?.(e);
  }
  /** An event another instance published. */
  receiveRemote(e: LiveEvent): void {
    this.ee.emit('all', e);
  }
  subscribe(fn: (e: LiveEvent) => void): () => void {
    this.ee.on('local', fn);
    return () => this.ee.off('local', fn);
  }
  subscribeAll(fn: (e: LiveEvent) => void): () => void {
    this.ee.on('all', fn);
    return () => this.ee.off('all', fn);
  }
}
