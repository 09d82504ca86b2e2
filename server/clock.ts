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
