/** Time, injected everywhere timers or "now" matter, so tests can run days of schedule in seconds. */
export interface Clock {
  now(): number;
  setTimeout(fn: () => void, ms: number): unknown;
  clearTimeout(handle: unknown): void;
}

export const realClock: Clock = {
  now: () => Date.now(),
  setTimeout: (fn, ms) => {
    const t = setTimeout(fn, ms);
    t.unref?.();
    return t;
  },
  clearTimeout: (h) => clearTimeout(h as NodeJS.Timeout),
};

export const sleep = (clock: Clock, ms: number) => new Promise<void>((r) => clock.setTimeout(r, ms));

type Timer = { id: number; due: number; fn: () => void };

/**
 * A clock that moves only when told to, for tests that run days of schedule in seconds.
 * `advance(ms)` fires due timers in time order (including ones set while advancing);
 * `nextDue()` tells where the next timer is, so a test can jump from event to event.
 */
export class VirtualClock implements Clock {
  private t: number;
  private nextId = 1;
  private timers: Timer[] = [];

  constructor(startMs: number) {
    this.t = startMs;
  }
  now(): number {
    return this.t;
  }
  setTimeout(fn: () => void, ms: number): number {
    const timer = { id: this.nextId++, due: this.t + Math.max(0, ms), fn };
    this.timers.push(timer);
    return timer.id;
  }
  clearTimeout(handle: unknown): void {
    this.timers = this.timers.filter((x) => x.id !== handle);
  }
  nextDue(): number | null {
    let d: number | null = null;
    for (const x of this.timers) if (d === null || x.due < d) d = x.due;
    return d;
  }
  advance(ms: number): void {
    const target = this.t + ms;
    for (;;) {
      let next: Timer | undefined;
      for (const x of this.timers) if (x.due <= target && (!next || x.due < next.due || (x.due === next.due && x.id < next.id))) next = x;
      if (!next) break;
      this.timers = this.timers.filter((x) => x !== next);
      this.t = Math.max(this.t, next.due);
      next.fn();
    }
    this.t = target;
  }
}
