import type { Clock } from './clock';

export type RelaySource = 'command' | 'button' | 'failsafe';

type Relay = {
  open: boolean;
  /** Clock ms when it was energised, and when the failsafe will close it. */
  sinceMs: number | null;
  closesAtMs: number | null;
  cmdId: string | null;
  timer: unknown;
  /** A close that a stuck valve refused; carried out when the fault clears. */
  pendingClose: { source: RelaySource; cmdId: string | null } | null;
};

export type RelaySnapshot = { relay: number; open: boolean; sinceMs: number | null; closesAtMs: number | null; cmdId: string | null };

/** Result of asking a relay to close. */
export type CloseResult = 'closed' | 'already_closed' | 'stuck';

/**
 * The board's relays and their failsafe timers. Each relay that is opened gets a timer of its
 * maximum on-time; when it runs out the bank calls `onFailsafe` and the board closes it. A relay
 * with a stuck valve refuses to close and stays open.
 */
export class RelayBank {
  private readonly relays: Relay[];
  /** Every off→on moment, in clock ms (capped; oldest dropped first). */
  readonly energizeLog: { relay: number; atMs: number }[] = [];
  static readonly ENERGIZE_LOG_LIMIT = 10_000;

  constructor(
    readonly count: number,
    private readonly clock: Clock,
    private readonly isStuck: (relay: number) => boolean,
    private readonly onFailsafe: (relay: number) => void,
  ) {
    this.relays = Array.from({ length: count }, () => ({ open: false, sinceMs: null, closesAtMs: null, cmdId: null, timer: null, pendingClose: null }));
  }

  has(relay: number): boolean {
    return Number.isInteger(relay) && relay >= 1 && relay <= this.count;
  }

  isOpen(relay: number): boolean {
    return this.relays[relay - 1].open;
  }

  openRelays(): number[] {
    const out: number[] = [];
    this.relays.forEach((r, i) => r.open && out.push(i + 1));
    return out;
  }

  /** Energise (or, if already open, re-arm its failsafe). Returns true when it went from off to on. */
  open(relay: number, maxOnMs: number, cmdId: string | null): boolean {
    const r = this.relays[relay - 1];
    const now = this.clock.now();
    const wasOpen = r.open;
    if (r.timer !== null) this.clock.clearTimeout(r.timer);
    if (!wasOpen) {
      r.open = true;
      r.sinceMs = now;
      this.energizeLog.push({ relay, atMs: now });
      if (this.energizeLog.length > RelayBank.ENERGIZE_LOG_LIMIT) this.energizeLog.shift();
    }
    r.cmdId = cmdId;
    r.pendingClose = null;
    r.closesAtMs = now + maxOnMs;
    r.timer = this.clock.setTimeout(() => {
      r.timer = null;
      this.onFailsafe(relay);
    }, maxOnMs);
    return !wasOpen;
  }

  close(relay: number, source: RelaySource, cmdId: string | null): CloseResult {
    const r = this.relays[relay - 1];
    if (!r.open) return 'already_closed';
    if (r.timer !== null) this.clock.clearTimeout(r.timer);
    r.timer = null;
    if (this.isStuck(relay)) {
      r.pendingClose = { source, cmdId };
      return 'stuck';
    }
    Object.assign(r, { open: false, sinceMs: null, closesAtMs: null, cmdId: null, pendingClose: null });
    return 'closed';
  }

  /** The close a stuck valve refused, if any; cleared by taking it. */
  takePendingClose(relay: number): { source: RelaySource; cmdId: string | null } | null {
    const r = this.relays[relay - 1];
    const p = r.open ? r.pendingClose : null;
    r.pendingClose = null;
    return p;
  }

  /** The cmdId of the command that holds the relay open (null for a button). */
  cmdIdOf(relay: number): string | null {
    return this.relays[relay - 1].cmdId;
  }

  snapshot(): RelaySnapshot[] {
    return this.relays.map((r, i) => ({ relay: i + 1, open: r.open, sinceMs: r.sinceMs, closesAtMs: r.closesAtMs, cmdId: r.cmdId }));
  }

  /** Cancel every failsafe timer (power-off). Relays keep their state. */
  disarmAll(): void {
    for (const r of this.relays) {
      if (r.timer !== null) this.clock.clearTimeout(r.timer);
      r.timer = null;
    }
  }
}
