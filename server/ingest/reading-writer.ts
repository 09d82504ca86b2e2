import type pg from 'pg';
import { from as copyFrom } from 'pg-copy-streams';
import { pipeline } from 'node:stream/promises';
import { Readable } from 'node:stream';
import type { Logger } from 'pino';
import type { Clock } from '../clock';

/** One reading's values, as a board's sample carries them (times are written beside them). */
export type ReadingValues = {
  rain: boolean;
  moistureRaw: number;
  moisturePct: number;
  supplyV: number;
  flowLpm: number | null;
  rssi: number;
};

/**
 * A board message's readings summed per UTC hour (usually one), for readings_hourly. Values are
 * rounded to the table's `real` first, so the sums are those of what is stored.
 */
export type HourSums = {
  hour: number; n: number;
  mSum: number; mMin: number; mMax: number;
  sSum: number; sMin: number; sMax: number;
  /** Readings that carried a flow value; the flow sums are 0 / ±Infinity until one does. */
  fN: number; fSum: number; fMin: number; fMax: number;
};

const HOUR_MS = 3_600_000;

/** Add one reading taken at `atMs` to its hour in `hours` (a message's list, or a batch's). */
export function addToHour(hours: HourSums[], atMs: number, s: Pick<ReadingValues, 'moisturePct' | 'supplyV' | 'flowLpm'>): void {
  const hour = Math.floor(atMs / HOUR_MS) * HOUR_MS;
  let h = hours.find((x) => x.hour === hour);
  if (!h) {
    h = { hour, n: 0, mSum: 0, mMin: Infinity, mMax: -Infinity, sSum: 0, sMin: Infinity, sMax: -Infinity, fN: 0, fSum: 0, fMin: Infinity, fMax: -Infinity };
    hours.push(h);
  }
  const m = Math.fround(s.moisturePct);
  const v = Math.fround(s.supplyV);
  h.n++;
  h.mSum += m;
  h.mMin = Math.min(h.mMin, m);
  h.mMax = Math.max(h.mMax, m);
  h.sSum += v;
  h.sMin = Math.min(h.sMin, v);
  h.sMax = Math.max(h.sMax, v);
  if (s.flowLpm !== null) {
    const f = Math.fround(s.flowLpm);
    h.fN++;
    h.fSum += f;
    h.fMin = Math.min(h.fMin, f);
    h.fMax = Math.max(h.fMax, f);
  }
}

/** Merging new readings into an hour of readings_hourly (`h` is the stored row, `excluded` the new sums). */
export const HOURLY_MERGE = `on conflict (controller_id, hour) do update set n = h.n + excluded.n,
  moisture_sum = h.moisture_sum + excluded.moisture_sum, moisture_min = least(h.moisture_min, excluded.moisture_min), moisture_max = greatest(h.moisture_max, excluded.moisture_max),
  supply_sum = h.supply_sum + excluded.supply_sum, supply_min = least(h.supply_min, excluded.supply_min), supply_max = greatest(h.supply_max, excluded.supply_max),
  flow_n = h.flow_n + excluded.flow_n,
  flow_sum = case when excluded.flow_n = 0 then h.flow_sum when h.flow_n = 0 then excluded.flow_sum else h.flow_sum + excluded.flow_sum end,
  flow_min = least(h.flow_min, excluded.flow_min), flow_max = greatest(h.flow_max, excluded.flow_max), updated_at = now()`;

const HOURLY_COLUMNS = '(controller_id, hour, n, moisture_sum, moisture_min, moisture_max, supply_sum, supply_min, supply_max, flow_n, flow_sum, flow_min, flow_max, updated_at)';

/**
 * One board message waiting for its batch: its rows already as COPY text, in bytes (a string
 * built line by line is a rope of many small strings until something flattens it; a busy fleet
 * keeps thousands of messages waiting).
 */
type Pending = { text: Buffer; n: number; controllerId: number; seq: number; hours: HourSums[]; resolve: () => void; reject: (e: Error) => void };

export type WriterStats = {
  rowsWritten: number;
  batches: number;
  failures: number;
  buffered: number;
  refused: number;
  maxBuffered: number;
};

/**
 * One COPY line of the readings table. Times are ISO 8601 strings PostgreSQL accepts (the
 * protocol's own, already checked, or Date#toISOString); numbers are finite (the protocol checked them).
 */
export function copyLine(controllerId: number, at: string, boardAt: string, receivedAt: string, seq: number, s: ReadingValues): string {
  return `${controllerId}\t${at}\t${boardAt}\t${receivedAt}\t${seq}\t${s.rain ? 't' : 'f'}\t${s.moistureRaw}\t${s.moisturePct}\t${s.supplyV}\t${s.flowLpm === null ? '\\N' : s.flowLpm}\t${s.rssi}\n`;
}

/**
 * Writes readings with COPY in batches, flushed by size and by time. Each batch commits
 * together with the boards' highest stored sequence numbers, so a restart resumes
 * de-duplication exactly where the database is, and with its readings' hourly sums merged into
 * readings_hourly, so the rollup never misses or double-counts a stored reading. A failed batch is kept and retried; when the
 * buffer is full, new work is refused (the board keeps it and resends later).
 */
export class ReadingWriter {
  readonly stats: WriterStats = { rowsWritten: 0, batches: 0, failures: 0, buffered: 0, refused: 0, maxBuffered: 0 };
  private queue: Pending[] = [];
  private timer: unknown = null;
  private flushing: Promise<void> | null = null;
  private closed = false;
  /** Pooled connections that already have the staging table (shared ingest). */
  private staged = new WeakSet<pg.PoolClient>();

  constructor(
    private pool: pg.Pool,
    private log: Logger,
    private clock: Clock,
    private opts: {
      batchRows: number;
      flushMs: number;
      maxBufferedRows: number;
      onBufferFull?: () => void;
      shared?: boolean;
      /** Flush at once when this many messages wait: all the connections that can bring one are waiting (external broker). */
      flushAtMessages?: number;
    } = {
      batchRows: 5000,
      flushMs: 200,
      maxBufferedRows: 500_000,
    },
  ) {}

  /**
   * Queue one board message's rows, as COPY text (one line each, from `copyLine`), with their
   * hourly sums (`addToHour`); resolves once they are committed.
   */
  writeText(controllerId: number, seq: number, text: string, n: number, hours: HourSums[]): Promise<void> {
    if (this.closed) return Promise.reject(new Error('writer closed'));
    if (this.stats.buffered + n > this.opts.maxBufferedRows) {
      this.stats.refused += n;
      this.opts.onBufferFull?.();
      return Promise.reject(new Error('reading buffer full'));
    }
    return new Promise((resolve, reject) => {
      // COPY text is ASCII (ISO times, numbers, tabs): one byte a character
      this.queue.push({ text: Buffer.from(text, 'latin1'), n, controllerId, seq, hours, resolve, reject });
      this.stats.buffered += n;
      this.stats.maxBuffered = Math.max(this.stats.maxBuffered, this.stats.buffered);
      if (this.stats.buffered >= this.opts.batchRows || (this.opts.flushAtMessages && this.queue.length >= this.opts.flushAtMessages)) void this.flush();
      else if (!this.timer) this.timer = this.clock.setTimeout(() => void this.flush(), this.opts.flushMs);
    });
  }

  flush(): Promise<void> {
    if (this.timer) {
      this.clock.clearTimeout(this.timer);
      this.timer = null;
    }
    if (this.flushing) return this.flushing.then(() => (this.queue.length ? this.flush() : undefined));
    if (this.queue.length === 0) return Promise.resolve();
    this.flushing = this.drain().finally(() => {
      this.flushing = null;
    });
    return this.flushing;
  }

  private async drain(): Promise<void> {
    let delay = 100;
    while (this.queue.length) {
      // Take up to batchRows worth of whole messages.
      const batch: Pending[] = [];
      let n = 0;
      while (this.queue.length && (n === 0 || n + this.queue[0].n <= this.opts.batchRows)) {
        const p = this.queue.shift()!;
        batch.push(p);
        n += p.n;
      }
      for (let attempt = 0; ; attempt++) {
        try {
          await this.commit(batch, attempt > 0);
          break;
        } catch (err) {
          this.stats.failures++;
          this.log.warn({ err: (err as Error).message, rows: n }, 'reading batch failed; retrying');
          if (this.closed) {
            for (const p of batch) p.reject(err as Error);
            this.stats.buffered -= n;
            return;
          }
          await new Promise((r) => this.clock.setTimeout(() => r(null), delay));
          delay = Math.min(delay * 2, 5000);
        }
      }
      delay = 100;
      this.stats.rowsWritten += n;
      this.stats.batches++;
      this.stats.buffered -= n;
      for (const p of batch) p.resolve();
    }
  }

  /** Three round trips on a first attempt (begin, COPY, update + commit); a retry checks what is stored first. */
  private async commit(batch: Pending[], retry: boolean): Promise<void> {
    const client = await this.pool.connect();
    try {
      await client.query('begin');
      let todo = batch;
      let created = false;
      if (retry && !this.opts.shared) {
        // A retry after a connection lost during COMMIT must not store a batch twice: a message whose
        // sequence number the board's row already shows was committed (each board's messages are
        // stored strictly in order, and last_seq moves in the same transaction as its rows). On a
        // first attempt nothing in the batch can be stored yet: the gateway let each message through once.
        // NO KEY UPDATE, not UPDATE: a valve event or command inserted meanwhile checks its foreign
        // key with a KEY SHARE lock on the same controller row, and must not wait for this COPY.
        const ids = [...new Set(batch.map((p) => p.controllerId))];
        const stored = await client.query('select id, last_seq from controllers where id = any($1::int[]) for no key update', [ids]);
        const last = new Map<number, number>(stored.rows.map((r: { id: number; last_seq: string }) => [r.id, Number(r.last_seq)]));
        todo = batch.filter((p) => p.seq > (last.get(p.controllerId) ?? 0));
      }
      const lines = todo.map((p) => p.text);
      const maxSeq = new Map<number, number>();
      for (const p of todo) maxSeq.set(p.controllerId, Math.max(maxSeq.get(p.controllerId) ?? 0, p.seq));
      // The board's stored sequence number first (the lock order every writer of readings_hourly
      // keeps: controller row, then hourly rows). Ids and sequence numbers are integers the gateway
      // checked, so they are written into the statement as such.
      const ids = [...maxSeq.keys()];
      const seqUpdate = ids.length
        ? `update controllers c set last_seq = greatest(c.last_seq, v.seq), last_seen_at = now()
             from unnest('{${ids.map(int).join(',')}}'::int[], '{${ids.map((i) => int(maxSeq.get(i)!)).join(',')}}'::bigint[]) as v(id, seq)
             where c.id = v.id`
        : null;
      if (lines.length && this.opts.shared) {
        // Several instances share the ingest: a message redelivered to another instance after a
        // crash may already be stored, so rows go through a staging table and only new ones land
        // (and only those are summed into their hours).
        if (!this.staged.has(client)) {
          await client.query('create temp table if not exists readings_in (like readings) on commit delete rows');
          created = true;
        }
        const stream = client.query(
          copyFrom('copy readings_in (controller_id, at, board_at, received_at, seq, rain, moisture_raw, moisture_pct, supply_v, flow_lpm, rssi) from stdin'),
        );
        await pipeline(Readable.from(chunk(lines)), stream);
        await client.query(`${seqUpdate ?? ''};
          with ins as (
            insert into readings select distinct on (r.controller_id, r.at, r.seq, r.board_at) r.* from readings_in r where not exists
              (select 1 from readings x where x.controller_id = r.controller_id and x.at = r.at and x.seq = r.seq and x.board_at = r.board_at)
            returning controller_id, at, moisture_pct, supply_v, flow_lpm)
          insert into readings_hourly as h ${HOURLY_COLUMNS}
            select controller_id, date_trunc('hour', at, 'UTC'), count(*)::int, sum(moisture_pct::float8), min(moisture_pct), max(moisture_pct),
              sum(supply_v::float8), min(supply_v), max(supply_v), count(flow_lpm)::int, sum(flow_lpm::float8), min(flow_lpm), max(flow_lpm), now()
            from ins group by 1, 2
          ${HOURLY_MERGE};
          commit`);
      } else {
        if (lines.length) {
          const stream = client.query(
            copyFrom(
              'copy readings (controller_id, at, board_at, received_at, seq, rain, moisture_raw, moisture_pct, supply_v, flow_lpm, rssi) from stdin',
            ),
          );
          await pipeline(Readable.from(chunk(lines)), stream);
        }
        // The sequence numbers, the hourly sums and the commit in one round trip.
        const hourly = hourlyValues(todo);
        await client.query([seqUpdate, hourly && `insert into readings_hourly as h ${HOURLY_COLUMNS} values ${hourly} ${HOURLY_MERGE}`, 'commit'].filter(Boolean).join(';\n'));
      }
      // (kept only once committed: a rolled-back transaction takes the new table with it)
      if (created) this.staged.add(client);
    } catch (e) {
      await client.query('rollback').catch(() => {});
      throw e;
    } finally {
      client.release();
    }
  }

  /** Write what is buffered (one attempt per batch once closing), then refuse new work. */
  async close(): Promise<void> {
    this.closed = true;
    await this.flush();
  }
}

/** A finite number as SQL text; anything else is a bug, never data (the protocol checked every value). */
function num(n: number): string {
  if (!Number.isFinite(n)) throw new Error(`not a finite number: ${n}`);
  return String(n);
}

/** The batch's hourly sums, merged per board and hour, as SQL VALUES rows (null when there are none). */
function hourlyValues(batch: Pending[]): string | null {
  const per = new Map<number, HourSums[]>();
  for (const p of batch) {
    const into = per.get(p.controllerId) ?? [];
    per.set(p.controllerId, into);
    for (const h of p.hours) {
      const t = into.find((x) => x.hour === h.hour);
      if (!t) {
        into.push({ ...h });
        continue;
      }
      t.n += h.n;
      t.mSum += h.mSum;
      t.mMin = Math.min(t.mMin, h.mMin);
      t.mMax = Math.max(t.mMax, h.mMax);
      t.sSum += h.sSum;
      t.sMin = Math.min(t.sMin, h.sMin);
      t.sMax = Math.max(t.sMax, h.sMax);
      t.fN += h.fN;
      t.fSum += h.fSum;
      t.fMin = Math.min(t.fMin, h.fMin);
      t.fMax = Math.max(t.fMax, h.fMax);
    }
  }
  const rows: string[] = [];
  for (const [cid, hours] of per) {
    for (const h of hours) {
      if (!h.n) continue;
      const flow = h.fN ? `${num(h.fSum)}, ${num(h.fMin)}, ${num(h.fMax)}` : 'null, null, null';
      rows.push(`(${int(cid)}, '${new Date(h.hour).toISOString()}', ${int(h.n)}, ${num(h.mSum)}, ${num(h.mMin)}, ${num(h.mMax)}, ${num(h.sSum)}, ${num(h.sMin)}, ${num(h.sMax)}, ${int(h.fN)}, ${flow}, now())`);
    }
  }
  return rows.length ? rows.join(',\n') : null;
}

/** An integer as SQL text; anything else is a bug, never data. */
function int(n: number): string {
  if (!Number.isSafeInteger(n)) throw new Error(`not an integer: ${n}`);
  return String(n);
}

/** Messages' COPY text in chunks of about 64 KB, so the stream writes a few large pieces. */
function* chunk(texts: Buffer[], bytes = 64_000) {
  let part: Buffer[] = [];
  let size = 0;
  for (const t of texts) {
    part.push(t);
    size += t.length;
    if (size >= bytes) {
      yield Buffer.concat(part, size);
      part = [];
      size = 0;
    }
  }
  if (part.length) yield Buffer.concat(part, size);
}
