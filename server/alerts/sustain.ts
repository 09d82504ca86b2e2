/**
 * Debounces a condition seen in a stream of observations: it must hold for `raiseAfterMs`
 * before it is raised, and be gone for `clearAfterMs` before it is resolved. An observation of
 * `null` (cannot tell: the zone is closed, the board is silent) breaks a pending start but never
 * resolves what is raised.
 */
export type SustainDecision = 'raise' | 'resolve' | null;

export class Sustain {
  private pending = new Map<string, number>();
  private clearing = new Map<string, number>();
  /** Keys raised now; callers add a key when they raise it, and the store's state is loaded into it at start. */
  readonly live = new Set<string>();

  observe(key: string, holds: boolean | null, now: number, raiseAfterMs: number, clearAfterMs: number): SustainDecision {
    if (holds === null) {
      this.pending.delete(key);
      this.clearing.delete(key);
      return null;
    }
    if (holds) {
      this.clearing.delete(key);
      if (this.live.has(key)) return null;
      const since = this.pending.get(key) ?? now;
      this.pending.set(key, since);
      if (now - since >= raiseAfterMs) {
        this.pending.delete(key);
        this.live.add(key);
        return 'raise';
      }
      return null;
    }
    this.pending.delete(key);
    if (!this.live.has(key)) return null;
    const since = this.clearing.get(key) ?? now;
    this.clearing.set(key, since);
    if (now - since >= clearAfterMs) {
      this.clearing.delete(key);
      this.live.delete(key);
      return 'resolve';
    }
    return null;
  }

  /** Forget a key entirely (it was resolved by an event, not by observations). */
  forget(key: string) {
    this.pending.delete(key);
    this.clearing.delete(key);
    this.live.delete(key);
  }
}

/** Classify a flow reading against the nominal flow of what is open. */
export function flowVerdict(flowLpm: number, expectedLpm: number, highRatio: number, lowRatio: number): 'high' | 'low' | 'normal' {
  const ratio = flowLpm / expectedLpm;
  if (ratio > highRatio) return 'high';
  if (ratio < lowRatio) return 'low';
  return 'normal';
}

/** Low-voltage hysteresis: low below the threshold, back to normal only 0.5 V above it. */
export function voltageLow(supplyV: number, thresholdV: number, wasLow: boolean): boolean {
  if (supplyV < thresholdV) return true;
  if (supplyV >= thresholdV + 0.5) return false;
  return wasLow;
}
