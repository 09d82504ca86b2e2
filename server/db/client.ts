import pg from 'pg';
import { drizzle, type NodePgDatabase } from 'drizzle-orm/node-postgres';
import * as schema from './schema/index';

export type Db = NodePgDatabase<typeof schema>;
export type DbHandle = { db: Db; pool: pg.Pool; close: () => Promise<void> };

export function createDb(url: string, opts: { max?: number } = {}): DbHandle {
  const pool = new pg.Pool({ connectionString: url, max: opts.max ?? 10 });
  // An idle client losing its connection (PostgreSQL restart) must not crash the process.
  pool.on('error', () => {});
  // A client checked out of the pool has no idle listener; without one of its own, its connection
  // dropping between two queries would be an uncaught error. The query in flight still fails.
  pool.on('connect', (client) => client.on('error', () => {}));
  const db = drizzle(pool, { schema, casing: 'snake_case' });
  return { db, pool, close: () => pool.end() };
}

export { schema };

/** Run fn in one transaction; the transaction handle has the same query API as Db. */
export function inTx<T>(db: Db, fn: (tx: Db) => Promise<T>): Promise<T> {
  return db.transaction((tx) => fn(tx as unknown as Db));
}
