/**
 * The only source of time the simulator uses: sampling, failsafe timers and every `at` a board
 * writes. Production runs on the real clock; tests inject a ManualClock and move it by hand.
 */
export interface Clock {
  now(): number;
  setTimeout(fn: () => void, ms: number): unknown;
  clearTimeout(handle: unknown): void;
}

export const realClock: Clock = {
  now: () => Date.now(),
  setTimeout: (fn, ms) => setTimeout(fn, ms),
  clearTimeout: (h) => clearTimeout(h as NodeJS.Timeout),
};

type Timer = { id: number; due: number; fn: () => void };

/**
 * A clock that only moves when told to. `advance(ms)` runs every timer that falls due on the
 * way, in time order (ties in the order they were set), including timers set while advancing.
 */
export class ManualClock implements Clock {
  private t: number;
  private nextId = 1;
  private timers: Timer[] = [];

  constructor(startMs = Date.parse('2025-06-02T06:00:00.000Z')) {
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

  /** Timers still waiting to run. */
  get pending(): number {
    return this.timers.length;
  }

  advance(ms: number): void {
    const target = this.t + ms;
    for (;;) {
      let next: Timer | undefined;
      for (const x of this.timers) if (x.due <= target && (!next || x.due < next.due || (x.due === next.due && x.id < next.id))) next = x;
      if (!next) break;
      this.timers = this.timers.filter((x) => x !== next);
      this.t = next.due;
      next.fn();
    }
    this.t = target;
  }
}
