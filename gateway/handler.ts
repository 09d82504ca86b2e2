import type { Logger } from 'pino';
import { MAX_PAYLOAD_BYTES, MAX_RECEIPT_SEQS, parseTopic, schemaFor, boardPublishes, type MessageKind } from '../server/contracts/protocol';
import type { DeviceSink, DropReason, GatewayStats } from './types';

export const emptyStats = (): GatewayStats => ({
  received: 0,
  accepted: 0,
  dropped: { malformed: 0, oversized: 0, duplicate: 0, unknown_topic: 0, acl_publish: 0, acl_subscribe: 0, bad_credentials: 0 },
  gaps: 0,
  commandsSent: 0,
});

/** How long stored messages wait by default to be named in a receipt: one receipt per board and round. */
export const RECEIPT_INTERVAL_MS = 5000;

type Outcome = { ok: true } | { ok: false; reason: DropReason };

/**
 * Turns raw board messages into domain facts: validates, drops duplicates, counts gaps,
 * and resolves only when the sink has stored the fact. Never throws on bad input.
 */
export class ProtocolHandler {
  readonly stats = emptyStats();
  /**
   * Highest sequence number accepted per board and lane (`r:`, `v:`, `a:` + serial). The readings
   * lane is seeded from the database at connect (only stored readings move it there); valve events
   * are also kept unique by the database, so a resend after a restart is stored once.
   */
  private lastSeq = new Map<string, number>();
  /** Highest sequence number seen per board in any lane, for counting gaps. */
  private highest = new Map<string, number>();
  /**
   * Each board's readings are stored strictly in order, so the stored sequence number (which only
   * readings move) never runs ahead of an unstored reading; valve facts keep their own order and
   * are de-duplicated by the database (one valve event per board and sequence number).
   */
  private chains = new Map<string, Promise<unknown>>();

  /**
   * Receipts waiting to go out, per board: the sequence numbers of its telemetry and event
   * messages stored since the last round. Sent together every receipt interval, one message per board.
   */
  private receipts = new Map<string, number[]>();
  private receiptTimer: ReturnType<typeof setTimeout> | null = null;
  private sendReceipt: ((serial: string, seqs: number[]) => void) | null = null;
  private receiptIntervalMs = RECEIPT_INTERVAL_MS;

  constructor(
    private sink: DeviceSink,
    private log: Logger,
    /** Server time (injected, so tests on a virtual clock stay consistent). */
    readonly now: () => number = Date.now,
    /**
     * Drop a sequence number at or below the highest seen. Right for one instance, which sees all
     * of a board's messages in order; with a shared subscription each instance sees only some, out
     * of order after a redelivery, so the database de-duplicates instead.
     */
    private readonly dedupeBySeq = true,
  ) {}

  /**
   * Boards whose last message could not be stored: everything after it is refused too, until the
   * board reconnects and sends again in order (so nothing stored ever runs ahead of a gap).
   */
  private poisoned = new Set<string>();

  /**
   * A board (re)connected, with its highest stored sequence number from the database. Messages
   * still being stored from its previous connection count too (they commit, or poison the board).
   */
  setLastSeq(serial: string, seq: number) {
    this.poisoned.delete(serial);
    this.lastSeq.set(`r:${serial}`, Math.max(seq, this.lastSeq.get(`r:${serial}`) ?? 0));
    this.highest.set(serial, Math.max(seq, this.highest.get(serial) ?? 0));
  }

  /** Where receipts go (the gateway's publish), and how often; without one, none are kept. */
  setReceiptSender(fn: ((serial: string, seqs: number[]) => void) | null, intervalMs = RECEIPT_INTERVAL_MS) {
    this.sendReceipt = fn;
    this.receiptIntervalMs = intervalMs;
  }

  /** This board message is stored: say so in the board's next receipt. */
  private stored(serial: string, seq: number) {
    if (!this.sendReceipt) return;
    const xs = this.receipts.get(serial);
    if (xs) xs.push(seq);
    else this.receipts.set(serial, [seq]);
    this.receiptTimer ??= setTimeout(() => this.flushReceipts(), this.receiptIntervalMs);
  }

  /**
   * Send every waiting receipt: a round goes out a few dozen boards at a time, so a thousand
   * receipts do not hold up a valve event behind them; `now` sends them all at once (on close).
   */
  flushReceipts(now = false) {
    if (this.receiptTimer) clearTimeout(this.receiptTimer);
    this.receiptTimer = null;
    const round = [...this.receipts];
    this.receipts = new Map();
    const send = (from: number) => {
      const to = now ? round.length : Math.min(round.length, from + 64);
      for (let k = from; k < to; k++) {
        const [serial, seqs] = round[k];
        for (let i = 0; i < seqs.length; i += MAX_RECEIPT_SEQS) this.sendReceipt?.(serial, seqs.slice(i, i + MAX_RECEIPT_SEQS));
      }
      if (to < round.length) setImmediate(() => send(to));
    };
    send(0);
  }

  drop(serial: string, reason: DropReason, detail?: string): Outcome {
    this.stats.dropped[reason]++;
    this.log.warn({ serial, reason, detail }, 'board message dropped');
    return { ok: false, reason };
  }

  /** Resolves when every message being stored has been stored (or refused). */
  async idle(): Promise<void> {
    while (this.chains.size) await Promise.allSettled([...this.chains.values()]);
  }

  /** Handle one message a board published. `fromSerial` is the authenticated sender, when known. */
  async handle(fromSerial: string | null, topic: string, payload: Buffer, receivedAt = new Date(this.now())): Promise<Outcome> {
    this.stats.received++;
    const t = parseTopic(topic);
    const who = fromSerial ?? t?.serial ?? 'unknown';
    if (!t || !boardPublishes.includes(t.kind)) return this.drop(who, 'unknown_topic', topic);
    if (fromSerial !== null && t.serial !== fromSerial) return this.drop(who, 'acl_publish', topic);
    if (payload.length > MAX_PAYLOAD_BYTES) return this.drop(who, 'oversized', `${payload.length} bytes`);
    let json: unknown;
    try {
      json = JSON.parse(payload.toString('utf8'));
    } catch {
      return this.drop(who, 'malformed', 'not JSON');
    }
    const parsed = schemaFor[t.kind].safeParse(json);
    json = undefined;
    if (!parsed.success) {
      return this.drop(who, 'malformed', parsed.error.issues.slice(0, 3).map((i) => `${i.path.join('.')}: ${i.message}`).join('; '));
    }
    // Only the sink keeps the message while it is stored: this frame waits for the commit holding
    // its sequence number alone, so a busy fleet's waiting messages do not outlive a young GC.
    let data: unknown = parsed.data;
    const msg = { seq: (parsed.data as { seq?: number }).seq };
    const serial = t.serial;
    // Each kind of fact is de-duplicated in its own lane: readings, valve facts, acknowledgements.
    const lane = t.kind === 'telemetry' ? 'r' : t.kind === 'ack' ? 'a' : 'v';
    const laneKey = `${lane}:${serial}`;
    // A refused message does not move the board's sequence, so its resend is accepted.
    if (lane !== 'a' && this.poisoned.has(serial)) throw new Error('an earlier message from this board was not stored; waiting for it again');
    if (this.dedupeBySeq && typeof msg.seq === 'number') {
      // Retained state and status are snapshots: always applied, never dropped as duplicates.
      if (t.kind !== 'state') {
        const last = this.lastSeq.get(laneKey) ?? 0;
        if (msg.seq <= last) {
          // Sent again: stored already, or being stored right now. Its receipt goes out once the
          // lane has settled without a failure (the board missed the first one).
          if (lane !== 'a') void this.receiptForDuplicate(serial, laneKey, msg.seq);
          return this.drop(serial, 'duplicate', `seq ${msg.seq} ≤ ${last}`);
        }
        this.lastSeq.set(laneKey, msg.seq);
      }
      // One counter runs through every kind of message, so gaps are counted across lanes.
      // A board counts from its power-on clock, so a big jump is a restart, not lost messages.
      const high = this.highest.get(serial) ?? 0;
      if (msg.seq > high + 1 && high > 0 && msg.seq - high < 1_000_000) {
        const missing = msg.seq - high - 1;
        this.stats.gaps += missing;
        this.sink.gap(serial, missing);
      }
      this.highest.set(serial, Math.max(high, msg.seq));
    }
    if (t.kind === 'ack') {
      // Nothing to store and nothing stored depends on it: an acknowledgement never waits.
      await this.deliver(serial, t.kind, data, receivedAt);
      this.stats.accepted++;
      return { ok: true };
    }
    // Two lanes per board, each strictly in order: readings (batched, so slower) and valve facts
    // (events, states, status). A valve event never waits for a batch of readings to commit.
    const prev = this.chains.get(laneKey) ?? Promise.resolve();
    const mine = prev.catch(() => {}).then(() => {
      if (this.poisoned.has(serial)) throw new Error('an earlier message from this board was not stored');
      const d = data;
      data = undefined;
      return this.deliver(serial, t.kind, d, receivedAt);
    });
    this.chains.set(laneKey, mine);
    try {
      await mine;
    } catch (e) {
      // Not stored: refuse what follows, and accept this message again when the board resends it.
      // (Only where this instance sees a board's messages in order and a reconnect clears it; with
      // a shared subscription the broker hands the message out again and the database de-duplicates.)
      if (this.dedupeBySeq) this.poisoned.add(serial);
      if (typeof msg.seq === 'number') this.lastSeq.set(laneKey, Math.min(this.lastSeq.get(laneKey) ?? msg.seq, msg.seq - 1));
      throw e;
    } finally {
      if (this.chains.get(laneKey) === mine) this.chains.delete(laneKey);
    }
    this.stats.accepted++;
    if ((t.kind === 'telemetry' || t.kind === 'event') && typeof msg.seq === 'number') this.stored(serial, msg.seq);
    return { ok: true };
  }

  private async receiptForDuplicate(serial: string, laneKey: string, seq: number) {
    if (!this.sendReceipt) return;
    await this.chains.get(laneKey)?.catch(() => {});
    const last = this.lastSeq.get(laneKey) ?? 0;
    if (!this.poisoned.has(serial) && seq <= last) this.stored(serial, seq);
  }

  private deliver(serial: string, kind: MessageKind, data: unknown, at: Date): Promise<void> {
    switch (kind) {
      case 'telemetry': {
        const m = data as import('../server/contracts/protocol').Telemetry;
        return this.sink.samples(serial, m.seq, m, at);
      }
      case 'event':
        return this.sink.relayChanged(serial, data as import('../server/contracts/protocol').BoardEvent, at);
      case 'state':
        return this.sink.relayState(serial, data as import('../server/contracts/protocol').RelayState, at);
      case 'ack':
        return this.sink.acknowledged(serial, data as import('../server/contracts/protocol').Ack, at);
      case 'status': {
        const s = data as import('../server/contracts/protocol').BoardStatus;
        return s.online ? this.sink.online(serial, s, at) : this.sink.offline(serial, 'last-will', at);
      }
      default:
        return Promise.resolve();
    }
  }
}
