import DataLoader from 'dataloader';
import { sql, type Column, type SQL } from 'drizzle-orm';

/**
 * Calls made in the same turn of the event loop go to the database together. When thousands of
 * zones start in the same second, each step of their start (look up, record, mark) is one query
 * for all of them instead of one each. Timers that fire together run in one timers phase, so the
 * batch is cut at the next check phase (setImmediate), not at the next microtask.
 */
const schedule = (cb: () => void) => void setImmediate(cb);

/** `run` gets every item of the batch and answers one result per item, in order. */
export function batched<T, R>(run: (items: readonly T[]) => Promise<R[]>, maxBatchSize = 2000): (item: T) => Promise<R> {
  const loader = new DataLoader<T, R, T>(async (items) => run(items), { cache: false, maxBatchSize, batchScheduleFn: schedule });
  return (item) => loader.load(item);
}

/** A write that is batched: resolves when the query carrying it has committed; rejects with it. */
export function batchedWrite<T>(write: (items: readonly T[]) => Promise<unknown>, maxBatchSize = 2000): (item: T) => Promise<void> {
  return batched(async (items: readonly T[]) => {
    await write(items);
    return items.map(() => undefined);
  }, maxBatchSize);
}

/** A lookup by key that is batched; `null` for a key with no row. */
export function batchedLoad<K, V>(load: (keys: readonly K[]) => Promise<Map<K, V>>, maxBatchSize = 2000): (key: K) => Promise<V | null> {
  return batched(async (keys: readonly K[]) => {
    const found = await load(keys);
    return keys.map((k) => found.get(k) ?? null);
  }, maxBatchSize);
}

/**
 * `column = any($1::int[])`: one array parameter for a batch of ids. (drizzle's inArray sends one
 * parameter per id, and building and parsing thousands of them costs more than the query.)
 */
export function inIds(column: Column, ids: readonly number[], type: 'int' | 'bigint' = 'int'): SQL {
  return sql`${column} = any(${sql.param([...ids])}::${sql.raw(type)}[])`;
}
