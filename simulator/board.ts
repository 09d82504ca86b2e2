import { MAX_COLUMN_SPAN_MS, MAX_SAMPLES_PER_TELEMETRY, commandSchema, type Command, type Sample, type SampleColumns } from '../server/contracts/protocol';
import { isoFromMs } from '../server/contracts/iso-ms';
import { realClock, type Clock } from './clock';
import { FaultState, type FaultChange, type FaultView } from './faults';
import { SensorModel, nominalFlowLpm, type SensorReading } from './physics';
import { Rng, boardSeed } from './prng';
import { RelayBank, type RelaySource } from './relays';
import type { BoardSpec } from './spec';
import { Uplink, type BoardLog } from './uplink';

export type { BoardLog } from './uplink';

export type SimBoardOptions = {
  brokerUrl: string;
  /** Simulation seed; with the serial it seeds this board's generator. Default 1. */
  seed?: number;
  clock?: Clock;
  sampleIntervalMs?: number;
  samplesPerMessage?: number;
  /**
   * Take a message's samples together when it is due, at their own times (sampleIntervalMs
   * apart, the last one now): one timer a message instead of one a sample, for fleets that sample
   * faster than one process can run timers. The values are the same; a valve change shows from
   * the next message's samples instead of from the next sample.
   */
  samplesInBursts?: boolean;
  /** Offline buffer size in messages (default 10,000); also how many sent messages it keeps until their receipt. */
  bufferLimit?: number;
  /** Send a message again when its receipt is this late (default 30 s). */
  resendAfterMs?: number;
  /** Failsafe for a relay opened by the local button (default 600 s). */
  buttonMaxOnSeconds?: number;
  /** First sequence number; default the clock in ms when the board is made, so a restarted board continues above. */
  seqStart?: number;
  /** Wait between reconnect attempts; default 1–2 s, fixed per board by its seed. */
  reconnectPeriodMs?: number;
  keepaliveSeconds?: number;
  log?: BoardLog;
};

export type BoardStats = {
  /** Messages the broker acknowledged (PUBACK), by kind. */
  published: { ack: number; state: number; status: number; telemetry: number; event: number };
  samplesTaken: number;
  /** Samples in telemetry the broker acknowledged. */
  samplesSent: number;
  /** Samples waiting in the offline buffer now. */
  samplesBuffered: number;
  /** Samples the broker took that no receipt from the server has named yet (kept to send again). */
  samplesUnconfirmed: number;
  /** Age of the oldest message waiting for its receipt, in ms (0 when none waits). */
  unconfirmedAgeMs: number;
  /** Messages sent again because their receipt was overdue, and receipts received. */
  resent: number;
  receipts: number;
  /** Messages (and samples) the full offline buffer threw away. */
  dropped: number;
  samplesDropped: number;
  reconnects: number;
};

export type RelayView = { relay: number; open: boolean; since: string | null; closesAt: string | null; cmdId: string | null };

const RECENT_COMMANDS = 64;
type Outcome = { ok: boolean; error?: string };

/**
 * One simulated relay board: one MQTT client, relays with failsafe timers, a local button,
 * sensors, an offline buffer and switchable faults. Every board→server message carries the next
 * value of one sequence counter and board time. Per command the board publishes its relay
 * event(s) first, then the retained state, then the ack.
 */
export class SimBoard {
  readonly serial: string;
  private readonly clock: Clock;
  private readonly sampleIntervalMs: number;
  private readonly samplesPerMessage: number;
  private lastSampleMs = 0;
  private readonly buttonMaxOnMs: number;
  private readonly reconnectPeriodMs: number;
  private readonly log?: BoardLog;
  private readonly uplink: Uplink;
  private readonly faultState = new FaultState();
  private readonly bank: RelayBank;
  private readonly sensors: SensorModel;
  private readonly phaseMs: number;
  /** Time between sampling timers: one sample, or one message's samples in burst mode. */
  private readonly stepMs: number;
  private powered = false;
  private startedOnce = false;
  private rain = false;
  /** The samples of the next telemetry message, as its columns: each sample's board time and values. */
  private batch: { boardMs: number[]; values: SensorReading[] } = { boardMs: [], values: [] };
  private latest: { boardMs: number; values: SensorReading } | null = null;
  private sampleTimer: unknown = null;
  private nextSampleMs = 0;
  private recent = new Map<string, Outcome>();
  /** Opens waiting for the start-up gap the server asked for (minGapMs), by relay. */
  private waitingOpens = new Map<number, { cmd: Extract<Command, { op: 'open' }>; timer: unknown }>();
  private promisedEnergiseAt = -Infinity;
  private samplesTaken = 0;

  constructor(
    readonly spec: BoardSpec,
    private readonly opts: SimBoardOptions,
  ) {
    this.serial = spec.serial;
    this.clock = opts.clock ?? realClock;
    this.sampleIntervalMs = opts.sampleIntervalMs ?? 1000;
    this.samplesPerMessage = opts.samplesPerMessage ?? 5;
    if (!(this.sampleIntervalMs >= 1)) throw new RangeError('sampleIntervalMs must be at least 1');
    if (!Number.isInteger(this.samplesPerMessage) || this.samplesPerMessage < 1 || this.samplesPerMessage > MAX_SAMPLES_PER_TELEMETRY)
      throw new RangeError(`samplesPerMessage must be 1–${MAX_SAMPLES_PER_TELEMETRY}`);
    this.buttonMaxOnMs = (opts.buttonMaxOnSeconds ?? 600) * 1000;
    this.log = opts.log;
    const seed = boardSeed(opts.seed ?? 1, spec.serial);
    this.sensors = new SensorModel(new Rng(seed));
    const timing = new Rng(seed ^ 0x9e3779b9);
    this.stepMs = opts.samplesInBursts ? this.sampleIntervalMs * this.samplesPerMessage : this.sampleIntervalMs;
    this.phaseMs = Math.floor(timing.float() * this.stepMs);
    this.reconnectPeriodMs = opts.reconnectPeriodMs ?? 1000 + Math.floor(timing.float() * 1000);
    this.bank = new RelayBank(spec.relayCount, this.clock, (r) => this.faultState.stuck.has(r), (r) => this.onFailsafe(r));
    this.uplink = new Uplink(
      {
        serial: spec.serial,
        secret: spec.secret,
        firmware: spec.firmware ?? 'sim-1.0.0',
        relayCount: spec.relayCount,
        boardIso: () => this.boardIso(),
        boardMs: () => this.clock.now() + this.faultState.skewMinutes * 60_000,
        relaysLater: () => {
          const snap = this.bank.snapshot();
          const skew = this.faultState.skewMinutes * 60_000;
          const iso = (ms: number | null) => (ms === null ? null : new Date(ms + skew).toISOString());
          return () => snap.map((r) => ({ open: r.open, since: iso(r.sinceMs), closesAt: iso(r.closesAtMs), cmdId: r.cmdId }));
        },
        networkUp: () => !this.faultState.offline,
        onCommand: (payload) => this.onCommand(payload),
      },
      opts.seqStart ?? Math.floor(this.clock.now()),
      opts.bufferLimit ?? 10_000,
      opts.log,
      opts.resendAfterMs,
    );
  }

  // ---- lifecycle -------------------------------------------------------------------------

  /** Power on: start sampling and connect. Settles once connected and subscribed (or stopped). */
  start(): Promise<void> {
    if (this.startedOnce) return this.uplink.started;
    this.powered = true;
    this.startedOnce = true;
    this.nextSampleMs = this.clock.now() + this.phaseMs;
    this.sampleTimer = this.clock.setTimeout(() => this.tick(), this.phaseMs);
    this.uplink.connect(this.opts.brokerUrl, { keepaliveSeconds: this.opts.keepaliveSeconds ?? 30, reconnectPeriodMs: this.reconnectPeriodMs });
    return this.uplink.started;
  }

  /** Power off: sends the samples taken so far; with a link, says offline (retained) and disconnects cleanly. */
  async stop(): Promise<void> {
    if (this.powered) this.flushBatch();
    this.powered = false;
    if (this.sampleTimer !== null) this.clock.clearTimeout(this.sampleTimer);
    this.sampleTimer = null;
    this.bank.disarmAll();
    await this.uplink.close();
  }

  get online(): boolean {
    return this.uplink.online;
  }

  // ---- what tests and the control API see -------------------------------------------------

  get energizeLog(): readonly { relay: number; atMs: number }[] {
    return this.bank.energizeLog;
  }

  get stats(): BoardStats {
    const c = this.uplink.counters;
    const buf = this.uplink.buffer;
    return {
      published: { ...c.published },
      samplesTaken: this.samplesTaken,
      samplesSent: c.samplesSent,
      samplesBuffered: buf.samplesQueued,
      samplesUnconfirmed: this.uplink.samplesUnconfirmed,
      unconfirmedAgeMs: this.uplink.unconfirmedAgeMs,
      resent: c.resent,
      receipts: c.receipts,
      dropped: buf.dropped,
      samplesDropped: buf.samplesDropped,
      reconnects: c.reconnects,
    };
  }

  relayStates(): RelayView[] {
    return this.bank.snapshot().map((r) => ({
      relay: r.relay,
      open: r.open,
      since: r.sinceMs === null ? null : this.boardIso(r.sinceMs),
      closesAt: r.closesAtMs === null ? null : this.boardIso(r.closesAtMs),
      cmdId: r.cmdId,
    }));
  }

  get rainTripped(): boolean {
    return this.rain;
  }

  latestSample(): Sample | null {
    return this.latest && { at: new Date(this.latest.boardMs).toISOString(), ...this.latest.values };
  }

  faults(): FaultView {
    return this.faultState.view();
  }

  /** Board time now (the clock plus any clock_skew), as ISO. */
  boardIso(ms = this.clock.now()): string {
    return new Date(ms + this.faultState.skewMinutes * 60_000).toISOString();
  }

  // ---- local inputs and faults ------------------------------------------------------------

  /** The rain input. A change is sampled and reported at once rather than at the next batch. */
  setRain(tripped: boolean): void {
    if (this.rain === tripped) return;
    this.rain = tripped;
    if (!this.powered) return;
    this.takeSample(0);
    this.flushBatch();
  }

  /** Someone pressed the board's button for a relay. A button open gets the button failsafe. */
  pressButton(relay: number, open: boolean): void {
    this.requireRelay(relay);
    if (open) {
      if (this.bank.open(relay, this.buttonMaxOnMs, null)) this.uplink.event(relay, true, 'button', null);
      this.uplink.state();
    } else {
      const r = this.bank.close(relay, 'button', null);
      if (r === 'closed') this.uplink.event(relay, false, 'button', null);
      if (r !== 'already_closed') this.uplink.state();
    }
  }

  setFault(f: FaultChange): void {
    const fs = this.faultState;
    switch (f.fault) {
      case 'offline':
        fs.offline = f.on;
        // Drop the TCP link without DISCONNECT: the broker fires the last-will.
        if (f.on) this.uplink.dropLink();
        break;
      case 'no_ack':
        fs.noAck = f.on;
        break;
      case 'low_voltage':
        fs.lowVoltage = f.on;
        break;
      case 'clock_skew':
        fs.skewMinutes = f.on ? (f.offsetMinutes ?? 0) : 0;
        break;
      case 'stuck_valve':
      case 'broken_head':
      case 'clogged': {
        if (f.relay !== undefined) this.requireRelay(f.relay);
        const set = f.fault === 'stuck_valve' ? fs.stuck : f.fault === 'broken_head' ? fs.broken : fs.clogged;
        const cleared = f.on ? [] : f.relay === undefined ? [...set] : [f.relay];
        if (f.on && f.relay !== undefined) set.add(f.relay);
        for (const r of cleared) set.delete(r);
        if (f.fault === 'stuck_valve') for (const r of cleared) this.finishRefusedClose(r);
        break;
      }
    }
  }

  // ---- relays -----------------------------------------------------------------------------

  private onCommand(payload: Buffer): void {
    if (this.faultState.noAck || !this.powered) return;
    let json: unknown;
    try {
      json = JSON.parse(payload.toString('utf8'));
    } catch {
      return this.log?.warn({ serial: this.serial }, 'command is not JSON; ignored');
    }
    const parsed = commandSchema.safeParse(json);
    if (!parsed.success) {
      const id = typeof json === 'object' && json !== null ? (json as { id?: unknown }).id : undefined;
      if (typeof id !== 'string' || id.length < 8 || id.length > 64) return this.log?.warn({ serial: this.serial }, 'command without a usable id; ignored');
      const why = parsed.error.issues.slice(0, 3).map((i) => `${i.path.join('.') || 'command'}: ${i.message}`).join('; ');
      return this.uplink.ack(id, false, `invalid command: ${why}`.slice(0, 200));
    }
    const cmd = parsed.data;
    // A command delivered twice (QoS 1) is answered again, not carried out again.
    const seen = this.recent.get(cmd.id);
    if (seen) return this.uplink.ack(cmd.id, seen.ok, seen.error);
    if ([...this.waitingOpens.values()].some((w) => w.cmd.id === cmd.id)) return; // answered when it is carried out
    // A close cancels an open of the same relay still waiting for its start-up gap.
    if (cmd.op !== 'open') {
      for (const [relay, w] of [...this.waitingOpens]) {
        if (cmd.op === 'close_all' || cmd.relay === relay) {
          this.clock.clearTimeout(w.timer);
          this.waitingOpens.delete(relay);
          this.answer(w.cmd.id, { ok: false, error: 'cancelled by a later close' }, []);
        }
      }
    }
    // A start sent ahead counts from the command's arrival: the board's clock plays no part.
    const startAtMs = cmd.op === 'open' && cmd.startInMs ? this.clock.now() + cmd.startInMs : -Infinity;
    if (cmd.op === 'open' && (cmd.minGapMs || startAtMs > this.clock.now()) && this.bank.has(cmd.relay) && !this.bank.isOpen(cmd.relay)) {
      const now = this.clock.now();
      const at = Math.max(now, startAtMs, this.lastEnergiseAt() + (cmd.minGapMs ?? 0));
      this.promisedEnergiseAt = Math.max(this.promisedEnergiseAt, at);
      if (at > now) {
        const prev = this.waitingOpens.get(cmd.relay);
        if (prev) {
          this.clock.clearTimeout(prev.timer);
          this.answer(prev.cmd.id, { ok: false, error: 'replaced by a later open' }, []);
        }
        // Timers may fire a millisecond early against the wall clock: wait out the remainder.
        const fire = () => {
          const log = this.bank.energizeLog;
          const due = Math.max(at, log.length ? log[log.length - 1].atMs + (cmd.minGapMs ?? 0) : -Infinity);
          const left = due - this.clock.now();
          if (left > 0) return void (this.waitingOpens.get(cmd.relay)!.timer = this.clock.setTimeout(fire, left));
          this.waitingOpens.delete(cmd.relay);
          if (!this.powered) return;
          this.carryOut(cmd);
        };
        this.waitingOpens.set(cmd.relay, { cmd, timer: this.clock.setTimeout(fire, at - now) });
        return;
      }
    }
    this.carryOut(cmd);
  }

  /** The last energisation, done or promised to a waiting open. */
  private lastEnergiseAt(): number {
    const log = this.bank.energizeLog;
    return Math.max(log.length ? log[log.length - 1].atMs : -Infinity, this.promisedEnergiseAt);
  }

  private carryOut(cmd: Command): void {
    // The acknowledgement goes first, then the events and state the command caused (docs/protocol.md).
    const reports: (() => void)[] = [];
    const outcome = this.execute(cmd, reports);
    this.answer(cmd.id, outcome, reports);
  }

  private answer(id: string, outcome: Outcome, reports: (() => void)[]): void {
    this.recent.set(id, outcome);
    if (this.recent.size > RECENT_COMMANDS) this.recent.delete(this.recent.keys().next().value as string);
    this.uplink.ack(id, outcome.ok, outcome.error);
    for (const report of reports) report();
  }

  private execute(cmd: Command, later: (() => void)[]): Outcome {
    if (cmd.op === 'close_all') {
      const stuck: number[] = [];
      let touched = false;
      for (const r of this.bank.openRelays()) {
        const res = this.bank.close(r, 'command', cmd.id);
        touched = true;
        if (res === 'closed') later.push(() => this.uplink.event(r, false, 'command', cmd.id));
        else if (res === 'stuck') stuck.push(r);
      }
      if (touched) later.push(() => this.uplink.state());
      return stuck.length ? { ok: false, error: `relay ${stuck.join(', ')} did not close: valve stuck` } : { ok: true };
    }
    if (!this.bank.has(cmd.relay)) return { ok: false, error: `relay ${cmd.relay} does not exist: this board has ${this.bank.count} relays` };
    if (cmd.op === 'open') {
      if (this.bank.open(cmd.relay, cmd.maxOnSeconds * 1000, cmd.id)) later.push(() => this.uplink.event(cmd.relay, true, 'command', cmd.id));
      later.push(() => this.uplink.state());
      return { ok: true };
    }
    const res = this.bank.close(cmd.relay, 'command', cmd.id);
    if (res === 'already_closed') return { ok: true };
    if (res === 'closed') later.push(() => this.uplink.event(cmd.relay, false, 'command', cmd.id));
    later.push(() => this.uplink.state());
    return res === 'closed' ? { ok: true } : { ok: false, error: `relay ${cmd.relay} did not close: valve stuck` };
  }

  private onFailsafe(relay: number): void {
    const cmdId = this.bank.cmdIdOf(relay);
    const res = this.bank.close(relay, 'failsafe', cmdId);
    if (res === 'closed') {
      this.uplink.event(relay, false, 'failsafe', cmdId);
      this.uplink.state();
    } else if (res === 'stuck') this.log?.warn({ serial: this.serial, relay }, 'failsafe could not close a stuck valve');
  }

  /** A stuck valve was freed: carry out the close it refused. */
  private finishRefusedClose(relay: number): void {
    const pending = this.bank.takePendingClose(relay);
    if (!pending || this.bank.close(relay, pending.source, pending.cmdId) !== 'closed') return;
    this.uplink.event(relay, false, pending.source, pending.cmdId);
    this.uplink.state();
  }

  private requireRelay(relay: number): void {
    if (!this.bank.has(relay)) throw new RangeError(`relay ${relay} does not exist: this board has ${this.bank.count} relays`);
  }

  // ---- sensors ----------------------------------------------------------------------------

  private tick(): void {
    this.sampleTimer = null;
    if (!this.powered) return;
    const now = this.clock.now();
    if (this.stepMs !== this.sampleIntervalMs) {
      for (let k = this.samplesPerMessage - 1; k >= 0; k--) this.takeSample(this.sampleIntervalMs / 1000, now - k * this.sampleIntervalMs);
      this.flushBatch();
    } else {
      this.takeSample(this.sampleIntervalMs / 1000);
      if (this.batch.boardMs.length >= this.samplesPerMessage) this.flushBatch();
    }
    this.nextSampleMs += this.stepMs;
    if (this.nextSampleMs < now) this.nextSampleMs = now + this.stepMs; // fell behind: skip, never burst
    this.sampleTimer = this.clock.setTimeout(() => this.tick(), this.nextSampleMs - now);
  }

  /** One sample. Physics steps by the nominal interval (not wall time), so values depend on the seed only. */
  private takeSample(dtSeconds: number, takenAtMs = this.clock.now()): void {
    const open = this.bank.openRelays();
    const master = this.spec.masterValveRelay ?? null;
    const watering = (master === null || open.includes(master)) && open.some((r) => r !== master);
    const reading = this.sensors.sample({
      dtSeconds,
      raining: this.rain,
      watering,
      energisedCoils: open.length,
      flowLpm: this.spec.hasFlowSensor ? nominalFlowLpm(open, this.spec.relayFlowsLpm, master, (r) => this.faultState.flowFactor(r)) : null,
      lowVoltage: this.faultState.lowVoltage,
    });
    // A board's sample times only move forward: two samples never share a millisecond.
    const atMs = Math.max(takenAtMs, this.lastSampleMs + 1);
    this.lastSampleMs = atMs;
    const boardMs = atMs + this.faultState.skewMinutes * 60_000;
    // One message's times count on from its first sample: a clock set back mid-batch, or a batch
    // spanning longer than a message may, starts a new message.
    const first = this.batch.boardMs[0];
    if (first !== undefined && (boardMs < first || boardMs - first > MAX_COLUMN_SPAN_MS)) this.flushBatch();
    this.batch.boardMs.push(boardMs);
    this.batch.values.push(reading);
    this.latest = { boardMs, values: reading };
    this.samplesTaken++;
  }

  private flushBatch(): void {
    const { boardMs, values } = this.batch;
    if (!boardMs.length) return;
    this.batch = { boardMs: [], values: [] };
    const t0 = boardMs[0];
    const flows = values.map((v) => v.flowLpm);
    const columns: SampleColumns = {
      t0: isoFromMs(t0),
      dtMs: boardMs.map((ms) => ms - t0),
      rain: values.map((v) => v.rain),
      moistureRaw: values.map((v) => v.moistureRaw),
      moisturePct: values.map((v) => v.moisturePct),
      supplyV: values.map((v) => v.supplyV),
      flowLpm: flows.every((f) => f === null) ? null : flows,
      rssi: values.map((v) => v.rssi),
    };
    this.uplink.telemetry(columns);
  }
}
