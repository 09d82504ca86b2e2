import type { MqttClient } from 'mqtt';
import {
  PROTOCOL_VERSION,
  topicFor,
  type Ack,
  type BoardEvent,
  type BoardStatus,
  type RelayState,
  type SampleColumns,
  type Telemetry,
  storedSchema,
} from '../server/contracts/protocol';
import { createBoardClient } from './link';
import { Outbox, type Outgoing } from './outbox';
import type { RelaySource } from './relays';

export type BoardLog = { info(obj: object, msg: string): void; warn(obj: object, msg: string): void };

const OFFLINE_WILL = JSON.stringify({ v: PROTOCOL_VERSION, online: false });

/** What the uplink needs from its board. */
export type UplinkBoard = {
  serial: string;
  secret: string;
  firmware: string;
  relayCount: number;
  boardIso(): string;
  /** Board time now, in ms (its clock, skewed or not). */
  boardMs(): number;
  /** The relays as they are now; formatted when called (see `send`). */
  relaysLater(): () => RelayState['relays'];
  networkUp(): boolean;
  onCommand(payload: Buffer): void;
};

/**
 * A board's side of the protocol: its MQTT client, its one sequence counter and its offline
 * buffer. Every message is made (seq, at) when the board decides to send it and is handed to
 * mqtt.js exactly once — straight away with a link, or from the buffer after the reconnect.
 */
export class Uplink {
  private client: MqttClient | null = null;
  private linkUp = false;
  private subscribed = false;
  private everConnected = false;
  private readonly outbox: Outbox;
  /**
   * Telemetry and event messages handed to the broker that no receipt has named yet, by sequence
   * number, oldest first. `ackedAt` is when the broker took the latest copy (PUBACK); null while
   * it is in flight (mqtt.js sends those again itself after a reconnect, and a busy server holds
   * PUBACKs back: that is not a lost message); 0 once mqtt.js gave the copy up.
   */
  private readonly unconfirmed = new Map<number, { m: Outgoing & { payload: string }; ackedAt: number | null }>();
  readonly counters = {
    published: { ack: 0, state: 0, status: 0, telemetry: 0, event: 0 },
    samplesSent: 0,
    reconnects: 0,
    /** Messages sent again because no receipt named them in time. */
    resent: 0,
    /** Receipts received. */
    receipts: 0,
    /** Messages the full list of unconfirmed ones let go of without a receipt (they may well be stored). */
    forgotten: 0,
  };
  private settleStart: () => void = () => {};
  /** Settles when the board is first connected and subscribed (or stopped). */
  readonly started: Promise<void>;

  constructor(
    private readonly b: UplinkBoard,
    private seq: number,
    bufferLimit: number,
    private readonly log?: BoardLog,
    /** Send a message again when the broker took it this long ago and no receipt has named it. */
    private readonly resendAfterMs = 30_000,
  ) {
    this.outbox = new Outbox(bufferLimit);
    this.unconfirmedLimit = bufferLimit;
    this.started = new Promise((resolve) => (this.settleStart = resolve));
  }

  get online(): boolean {
    return this.linkUp;
  }

  private readonly unconfirmedLimit: number;

  get buffer(): Pick<Outbox, 'samplesQueued' | 'dropped' | 'samplesDropped'> {
    return this.outbox;
  }

  /** How long ago the broker took the oldest message still waiting for its receipt (0: none waits). */
  get unconfirmedAgeMs(): number {
    let oldest = Infinity;
    for (const u of this.unconfirmed.values()) if (u.ackedAt !== null) oldest = Math.min(oldest, u.ackedAt);
    return oldest === Infinity ? 0 : Date.now() - oldest;
  }

  /** Samples in messages the broker took but no receipt has named yet. */
  get samplesUnconfirmed(): number {
    let n = 0;
    for (const u of this.unconfirmed.values()) n += u.m.samples;
    return n;
  }

  connect(brokerUrl: string, o: { keepaliveSeconds: number; reconnectPeriodMs: number }): void {
    const b = this.b;
    const c = createBoardClient(brokerUrl, b.networkUp, {
      clientId: b.serial,
      username: b.serial,
      password: b.secret,
      clean: false,
      keepalive: o.keepaliveSeconds,
      reconnectPeriod: o.reconnectPeriodMs,
      connectTimeout: 15_000,
      // a real board keeps trying when the broker refuses it for a while (server unavailable)
      reconnectOnConnackError: true,
      queueQoSZero: false,
      will: { topic: topicFor(b.serial, 'status'), payload: Buffer.from(OFFLINE_WILL), qos: 1, retain: true },
    });
    const cmdTopic = topicFor(b.serial, 'cmd');
    const storedTopic = topicFor(b.serial, 'stored');
    c.on('connect', () => this.onConnect());
    c.on('close', () => (this.linkUp = false));
    c.on('error', (err) => this.log?.warn({ serial: b.serial, err: err.message }, 'board link error'));
    c.on('message', (topic, payload) => {
      if (topic === cmdTopic) b.onCommand(payload);
      else if (topic === storedTopic) this.onReceipt(payload);
    });
    this.client = c;
    Uplink.watched.add(this);
    Uplink.sweeper ??= setInterval(Uplink.sweep, 500);
    Uplink.sweeper.unref?.();
    c.connect();
  }

  /** A receipt: the messages it names are stored, and need not be kept any longer. */
  private onReceipt(payload: Buffer): void {
    let json: unknown;
    try {
      json = JSON.parse(payload.toString('utf8'));
    } catch {
      return this.log?.warn({ serial: this.b.serial }, 'receipt is not JSON; ignored');
    }
    const r = storedSchema.safeParse(json);
    if (!r.success) return this.log?.warn({ serial: this.b.serial }, 'receipt does not match the protocol; ignored');
    this.counters.receipts++;
    for (const seq of r.data.seqs) {
      this.unconfirmed.delete(seq);
      if (seq > this.highestReceipted) this.highestReceipted = seq;
    }
  }

  /** Every connected board, checked twice a second for messages whose receipt is overdue. */
  private static watched = new Set<Uplink>();
  private static sweeper: ReturnType<typeof setInterval> | null = null;
  private static sweep(): void {
    const now = Date.now();
    for (const up of Uplink.watched) up.resendOverdue(now, up.resendAfterMs);
  }

  /** The highest sequence number a receipt has named. */
  private highestReceipted = -1;

  /**
   * Send again, in order, what the broker took at least `age` ms ago while a receipt has since
   * named a later message: the server got past it without storing it. A server that is merely
   * behind names nothing later, so an overloaded one is not sent everything twice.
   */
  private resendOverdue(now: number, age: number): number {
    if (!this.linkUp || !this.client || !this.unconfirmed.size) return 0;
    const due = [...this.unconfirmed]
      .filter(([seq, u]) => u.ackedAt !== null && now - u.ackedAt >= age && seq < this.highestReceipted)
      .sort((x, y) => x[0] - y[0]);
    for (const [seq, u] of due) {
      u.ackedAt = null;
      this.counters.resent++;
      this.client.publish(u.m.topic, u.m.payload, { qos: 1 }, (err) => this.tookOver(seq, err));
    }
    return due.length;
  }

  /** The broker took a copy (or mqtt.js gave it up: then it is due again at once). */
  private tookOver(seq: number, err?: Error | null): void {
    const u = this.unconfirmed.get(seq);
    if (u) u.ackedAt = err ? 0 : Date.now();
  }

  /** Drop the TCP link without DISCONNECT (the broker fires the last-will). */
  dropLink(): void {
    const s = this.client?.stream;
    if (s && !s.destroyed) s.destroy();
  }

  /** With a link: a retained online:false, then a clean disconnect. */
  async close(): Promise<void> {
    this.settleStart();
    Uplink.handOver(true);
    const c = this.client;
    Uplink.watched.delete(this);
    if (!Uplink.watched.size && Uplink.sweeper) {
      clearInterval(Uplink.sweeper);
      Uplink.sweeper = null;
    }
    if (!c) return;
    if (this.linkUp) {
      const status: BoardStatus = { v: PROTOCOL_VERSION, online: false, at: this.b.boardIso() };
      await withTimeout(new Promise<void>((done) => c.publish(topicFor(this.b.serial, 'status'), JSON.stringify(status), { qos: 1, retain: true }, () => done())), 2000);
    }
    this.linkUp = false;
    const clean = await withTimeout(c.endAsync(false).then(() => true), 2000);
    if (!clean) await c.endAsync(true).catch(() => {});
  }

  // ---- messages ---------------------------------------------------------------------------

  private nextSeq(): number {
    return this.seq++;
  }

  /** One telemetry message, its samples as columns. */
  telemetry(columns: SampleColumns): void {
    const m: Telemetry = { v: PROTOCOL_VERSION, seq: this.nextSeq(), at: this.b.boardIso(), columns };
    this.send({ kind: 'telemetry', topic: topicFor(this.b.serial, 'telemetry'), payload: JSON.stringify(m), retain: false, samples: columns.dtMs.length, seq: m.seq });
  }

  // Valve messages fix their sequence number and time now and are written out when handed over.
  event(relay: number, open: boolean, source: RelaySource, cmdId: string | null): void {
    const seq = this.nextSeq();
    const atMs = this.b.boardMs();
    const m = (): BoardEvent => ({ v: PROTOCOL_VERSION, seq, at: new Date(atMs).toISOString(), kind: 'relay', relay, open, source, cmdId });
    this.send({ kind: 'event', topic: topicFor(this.b.serial, 'event'), payload: () => JSON.stringify(m()), retain: false, samples: 0, seq });
  }

  ack(id: string, ok: boolean, error?: string): void {
    const seq = this.nextSeq();
    const atMs = this.b.boardMs();
    const m = (): Ack => ({ v: PROTOCOL_VERSION, id, ok, ...(error ? { error } : {}), seq, at: new Date(atMs).toISOString() });
    this.send({ kind: 'ack', topic: topicFor(this.b.serial, 'ack'), payload: () => JSON.stringify(m()), retain: false, samples: 0 });
  }

  /** Retained relay state. Without a link none is made: a fresh one follows the reconnect. */
  state(): void {
    if (!this.linkUp) return;
    const seq = this.nextSeq();
    const atMs = this.b.boardMs();
    const relays = this.b.relaysLater();
    const m = (): RelayState => ({ v: PROTOCOL_VERSION, seq, at: new Date(atMs).toISOString(), relays: relays() });
    this.send({ kind: 'state', topic: topicFor(this.b.serial, 'state'), payload: () => JSON.stringify(m()), retain: true, samples: 0 });
  }

  private status(): void {
    const m: BoardStatus = { v: PROTOCOL_VERSION, online: true, firmware: this.b.firmware, relayCount: this.b.relayCount, at: this.b.boardIso() };
    this.send({ kind: 'status', topic: topicFor(this.b.serial, 'status'), payload: JSON.stringify(m), retain: true, samples: 0 });
  }

  /**
   * Messages made (sequence number and time fixed) but not yet handed to mqtt.js, for every
   * board in this process, in the order they were made. A real board switches its relay whatever
   * its network stack is doing, and each board has a processor of its own; here a thousand boards
   * share one, so a board's replies are handed over once the commands that arrived together have
   * all been carried out, or a relay would wait for other boards' publishing.
   */
  private static pending: ({ up: Uplink; m: Outgoing } | undefined)[] = [];
  /** The next one to hand over (the queue is not re-sliced on every round: it can be long). */
  private static head = 0;
  private static scheduled = false;
  /** How long one round may hand over before the event loop gets its turn (a test sets it lower to make a backlog). */
  static sliceMs = 8;

  /** Messages made and not yet handed over, across every board in this process. */
  static get waiting(): number {
    return Uplink.pending.length - Uplink.head;
  }

  /**
   * Hand over for up to `sliceMs`, so that relay timers and incoming commands due meanwhile run
   * between the rounds. Rounds are measured in time, not in messages, and the queue is read from
   * a head index: with thousands of boards the loop's turn is long, and copying the rest of a long
   * queue after every few dozen made the hand-over itself the slow part. (A backlog still builds
   * here when the boards offer more than the machine's cores carry; every message made later,
   * a valve event too, then waits behind it. `waiting` shows it.)
   */
  private static handOver(all = false): void {
    Uplink.scheduled = false;
    const q = Uplink.pending;
    const until = performance.now() + Uplink.sliceMs;
    while (Uplink.head < q.length) {
      const x = q[Uplink.head]!;
      q[Uplink.head++] = undefined;
      x.up.publish(x.m);
      if (!all && (Uplink.head & 15) === 0 && performance.now() >= until) break;
    }
    if (Uplink.head >= q.length) {
      Uplink.pending = [];
      Uplink.head = 0;
    } else {
      if (Uplink.head > 4096) {
        Uplink.pending = q.slice(Uplink.head);
        Uplink.head = 0;
      }
      Uplink.schedule();
    }
  }

  private static schedule(): void {
    if (Uplink.scheduled) return;
    Uplink.scheduled = true;
    setImmediate(() => Uplink.handOver());
  }

  private send(m: Outgoing): void {
    Uplink.pending.push({ up: this, m });
    Uplink.schedule();
  }

  /** Hand a message to mqtt.js now, or keep it in the offline buffer. */
  private publish(m0: Outgoing): void {
    const payload = typeof m0.payload === 'function' ? m0.payload() : m0.payload;
    const m = { ...m0, payload };
    if (!this.linkUp || !this.client) return this.outbox.push(m);
    const seq = m.seq;
    if (seq !== undefined) {
      this.unconfirmed.set(seq, { m, ackedAt: null });
      // a board's memory is bounded: past it, the oldest is let go (it has its PUBACK; most likely stored)
      if (this.unconfirmed.size > this.unconfirmedLimit) {
        this.unconfirmed.delete(this.unconfirmed.keys().next().value!);
        this.counters.forgotten++;
      }
    }
    this.client.publish(m.topic, payload, { qos: 1, retain: m.retain }, (err) => {
      if (seq !== undefined) this.tookOver(seq, err);
      if (err) return this.log?.warn({ serial: this.b.serial, kind: m.kind, err: err.message }, 'publish abandoned');
      this.counters.published[m.kind]++;
      this.counters.samplesSent += m.samples;
    });
  }

  /**
   * The broker accepted us. The first time, subscribe to commands before saying anything (the
   * board counts as started once the subscription is granted); then status, everything
   * buffered in order, and a fresh state.
   */
  private onConnect(): void {
    const c = this.client;
    if (!c) return;
    if (this.subscribed) return this.onLinkUp();
    c.subscribe([topicFor(this.b.serial, 'cmd'), topicFor(this.b.serial, 'stored')], { qos: 1 }, (err, granted) => {
      if (err) return this.log?.warn({ serial: this.b.serial, err: err.message }, 'command subscription failed; retrying on reconnect');
      if (granted?.some((g) => g.qos === 128)) this.log?.warn({ serial: this.b.serial }, 'command subscription refused by the broker');
      this.subscribed = true;
      this.settleStart();
      if (c.connected) this.onLinkUp();
    });
  }

  private onLinkUp(): void {
    if (this.linkUp) return;
    this.linkUp = true;
    if (this.everConnected) this.counters.reconnects++;
    this.everConnected = true;
    this.status();
    // Straight out, not behind the hand-over queue: whatever still waits there was made after
    // everything in the buffer, and a board's sequence numbers must reach the server in order.
    for (const m of this.outbox.drain()) this.publish(m);
    this.state();
  }
}

function withTimeout<T>(p: Promise<T>, ms: number): Promise<T | false> {
  return new Promise((resolve) => {
    const t = setTimeout(() => resolve(false), ms);
    p.then(
      (v) => {
        clearTimeout(t);
        resolve(v);
      },
      () => {
        clearTimeout(t);
        resolve(false);
      },
    );
  });
}
