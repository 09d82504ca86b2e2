import { z } from 'zod';

/**
 * Runnel device protocol, version 1 — the one place its messages are defined.
 * The gateway and the simulator both import these schemas; docs/protocol.md explains them.
 *
 * Topics (all under `runnel/v1/<serial>/`):
 *   cmd        server → board   QoS 1           a command to a relay
 *   ack        board  → server  QoS 1           the board's answer to a command
 *   state      board  → server  QoS 1, retained the board's relays, as they are now
 *   status     board  → server  QoS 1, retained online/offline; the last-will says offline
 *   telemetry  board  → server  QoS 1           a batch of sensor samples
 *   event      board  → server  QoS 1           a relay opened or closed, and why
 *   stored     server → board   QoS 0           a receipt: these telemetry and event messages are stored
 */
export const PROTOCOL_VERSION = 1;
export const TOPIC_ROOT = 'runnel/v1';
export const MAX_PAYLOAD_BYTES = 16_384;
export const MAX_SAMPLES_PER_TELEMETRY = 120;

export const messageKinds = ['cmd', 'ack', 'state', 'status', 'telemetry', 'event', 'stored'] as const;
export type MessageKind = (typeof messageKinds)[number];
export const boardPublishes: readonly MessageKind[] = ['ack', 'state', 'status', 'telemetry', 'event'];

export const serialSchema = z.string().regex(/^[A-Z0-9][A-Z0-9-]{3,31}$/);

export function topicFor(serial: string, kind: MessageKind): string {
  return `${TOPIC_ROOT}/${serial}/${kind}`;
}

/** Split a topic into serial and kind; null for anything that is not a protocol topic. */
export function parseTopic(topic: string): { serial: string; kind: MessageKind } | null {
  const parts = topic.split('/');
  if (parts.length !== 4 || `${parts[0]}/${parts[1]}` !== TOPIC_ROOT) return null;
  const kind = parts[3] as MessageKind;
  if (!messageKinds.includes(kind) || !serialSchema.safeParse(parts[2]).success) return null;
  return { serial: parts[2], kind };
}

// A year before 1970 is a board whose clock was never set (and year 0 is no date PostgreSQL stores).
const isoTime = z.iso.datetime({ offset: true }).refine((s) => s.slice(0, 4) >= '1970', { message: 'a time before 1970' });
const relayNo = z.number().int().min(1).max(8);
const seq = z.number().int().min(0).max(2 ** 53 - 1);
const v = z.literal(PROTOCOL_VERSION);

/** Longest start-up gap a command may ask for between two relays. */
export const MAX_GAP_MS = 60_000;

/** Furthest ahead a command may be sent before its start. */
export const MAX_START_IN_MS = 60_000;

/** Longest a command may hold a relay open; the board refuses more. */
export const MAX_ON_SECONDS = 4 * 3600;

export const commandSchema = z.discriminatedUnion('op', [
  z.strictObject({
    v, id: z.string().min(8).max(64), op: z.literal('open'), relay: relayNo, maxOnSeconds: z.number().int().min(1).max(MAX_ON_SECONDS),
    /** The board energises this relay no sooner than this long after it last energised any relay (it waits, then acknowledges). */
    minGapMs: z.number().int().min(0).max(MAX_GAP_MS).optional(),
    /** A start sent ahead: energise no sooner than this long after the command arrives (no clock involved). */
    startInMs: z.number().int().min(0).max(MAX_START_IN_MS).optional(),
    at: isoTime,
  }),
  z.strictObject({ v, id: z.string().min(8).max(64), op: z.literal('close'), relay: relayNo, at: isoTime }),
  z.strictObject({ v, id: z.string().min(8).max(64), op: z.literal('close_all'), at: isoTime }),
]);
export type Command = z.infer<typeof commandSchema>;

export const ackSchema = z.strictObject({
  v,
  id: z.string().min(8).max(64),
  ok: z.boolean(),
  error: z.string().max(200).optional(),
  seq,
  at: isoTime,
});
export type Ack = z.infer<typeof ackSchema>;

export const stateSchema = z.strictObject({
  v,
  seq,
  at: isoTime,
  /** relays[i] is relay i + 1. */
  relays: z
    .array(
      z.strictObject({
        open: z.boolean(),
        /** When it opened (board time) and when the board will close it by itself. */
        since: isoTime.nullable(),
        closesAt: isoTime.nullable(),
        cmdId: z.string().max(64).nullable(),
      }),
    )
    .min(1)
    .max(8),
});
export type RelayState = z.infer<typeof stateSchema>;

export const statusSchema = z.strictObject({
  v,
  online: z.boolean(),
  firmware: z.string().max(32).optional(),
  relayCount: z.number().int().min(1).max(8).optional(),
  at: isoTime.optional(),
});
export type BoardStatus = z.infer<typeof statusSchema>;

export const sampleSchema = z.strictObject({
  at: isoTime,
  rain: z.boolean(),
  moistureRaw: z.number().int().min(0).max(4095),
  moisturePct: z.number().min(0).max(100),
  supplyV: z.number().min(0).max(60),
  flowLpm: z.number().min(0).max(5000).nullable(),
  rssi: z.number().int().min(-127).max(0),
});
export type Sample = z.infer<typeof sampleSchema>;

/** The first millisecond of the year 10000: later times have no four-digit year. */
const LAST_MS = Date.UTC(10000, 0, 1);

/** Longest a columnar message's samples may span (its first to its last). */
export const MAX_COLUMN_SPAN_MS = 6 * 3_600_000;

const column = <T extends z.ZodType>(item: T) => z.array(item).min(1).max(MAX_SAMPLES_PER_TELEMETRY);

/**
 * A column of numbers in [min, max] (whole ones where `int`; null allowed where `nullable`),
 * checked in one pass: a busy fleet's columns hold tens of thousands of values a second, and a
 * check per element is most of what reading them costs. The message names the rule broken.
 */
function numberColumn<N extends boolean = false>(min: number, max: number, opts: { int?: boolean; nullable?: N } = {}) {
  const what = `${opts.int ? 'whole numbers' : 'numbers'} from ${min} to ${max}${opts.nullable ? ' or null' : ''}`;
  return z.custom<(N extends true ? number | null : number)[]>(
    (a) => {
      if (!Array.isArray(a) || a.length < 1 || a.length > MAX_SAMPLES_PER_TELEMETRY) return false;
      for (const x of a) {
        if (x === null && opts.nullable) continue;
        if (typeof x !== 'number' || !(x >= min && x <= max) || (opts.int && !Number.isInteger(x))) return false;
      }
      return true;
    },
    { message: `expected 1–${MAX_SAMPLES_PER_TELEMETRY} ${what}` },
  );
}

/**
 * The same samples as columns: one array per field, sample i at index i of each, and times as
 * whole milliseconds after `t0` (the first sample's board time). Several times smaller than the
 * sample objects, and cheaper to write, read and check: what a busy board sends.
 */
export const sampleColumnsSchema = z
  .strictObject({
    t0: isoTime,
    dtMs: numberColumn(0, MAX_COLUMN_SPAN_MS, { int: true }),
    rain: column(z.boolean()),
    moistureRaw: numberColumn(0, 4095, { int: true }),
    moisturePct: numberColumn(0, 100),
    supplyV: numberColumn(0, 60),
    /** null: no flow sensor fitted (every sample's flow is null). */
    flowLpm: numberColumn(0, 5000, { nullable: true }).nullable(),
    rssi: numberColumn(-127, 0, { int: true }),
  })
  .refine(
    (c) => [c.rain, c.moistureRaw, c.moisturePct, c.supplyV, c.flowLpm ?? c.dtMs, c.rssi].every((a) => a.length === c.dtMs.length),
    { message: 'every column must have one value per sample (as many as dtMs)' },
  )
  .refine((c) => Date.parse(c.t0) + Math.max(...c.dtMs) < LAST_MS, { message: 'a sample time after the year 9999' });
export type SampleColumns = z.infer<typeof sampleColumnsSchema>;

/** A batch of samples: as sample objects (`samples`) or as columns (`columns`), exactly one of the two. */
export const telemetrySchema = z
  .strictObject({
    v,
    seq,
    at: isoTime,
    samples: z.array(sampleSchema).min(1).max(MAX_SAMPLES_PER_TELEMETRY).optional(),
    columns: sampleColumnsSchema.optional(),
  })
  .refine((m) => (m.samples === undefined) !== (m.columns === undefined), { message: 'a telemetry message carries either samples or columns, not both or neither' });
export type Telemetry = z.infer<typeof telemetrySchema>;

/**
 * A telemetry message's samples as objects, in either form (a columnar sample's time is written
 * as Date#toISOString writes it). For tests and tools that read what boards send, not the ingest path.
 */
export function telemetrySamples(t: Telemetry): Sample[] {
  if (t.samples) return t.samples;
  const c = t.columns!;
  const t0 = Date.parse(c.t0);
  return c.dtMs.map((dt, i) => ({
    at: new Date(t0 + dt).toISOString(), rain: c.rain[i], moistureRaw: c.moistureRaw[i], moisturePct: c.moisturePct[i],
    supplyV: c.supplyV[i], flowLpm: c.flowLpm ? c.flowLpm[i] : null, rssi: c.rssi[i],
  }));
}

export const valveSources = ['command', 'button', 'failsafe', 'server'] as const;
export type ValveSource = (typeof valveSources)[number];

export const eventSchema = z.strictObject({
  v,
  seq,
  at: isoTime,
  kind: z.literal('relay'),
  relay: relayNo,
  open: z.boolean(),
  /** command: the server asked; button: someone pressed the board's button; failsafe: the board's own timer closed it. */
  source: z.enum(['command', 'button', 'failsafe']),
  cmdId: z.string().max(64).nullable(),
});
export type BoardEvent = z.infer<typeof eventSchema>;

/** Most sequence numbers one receipt lists. */
export const MAX_RECEIPT_SEQS = 1000;

/**
 * A receipt: the board's telemetry and event messages with these sequence numbers are stored.
 * A board keeps each such message until a receipt names it and sends it again when none has come
 * for a while; the server stores a message once however often it comes (docs/protocol.md).
 */
export const storedSchema = z.strictObject({
  v,
  seqs: z.array(seq).min(1).max(MAX_RECEIPT_SEQS),
});
export type Stored = z.infer<typeof storedSchema>;

export const schemaFor = {
  cmd: commandSchema,
  ack: ackSchema,
  state: stateSchema,
  status: statusSchema,
  telemetry: telemetrySchema,
  event: eventSchema,
  stored: storedSchema,
} as const;
