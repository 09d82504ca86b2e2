import { EventEmitter } from 'node:events';
import type { LiveEvent } from './events';

/**
 * In-process fan-out of domain events. Several instances share events through PostgreSQL
 * LISTEN/NOTIFY by putting a relay in front of this same interface.
 */
export class LiveBus {
  private ee = new EventEmitter();
  constructor() {
    this.ee.setMaxListeners(0);
  }
  publish(e: LiveEvent): void {
    this.ee.emit('event', e);
  }
  subscribe(fn: (e: LiveEvent) => void): () => void {
    this.ee.on('event', fn);
    return () => this.ee.off('event', fn);
  }
}
