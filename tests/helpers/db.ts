import pg from 'pg';
import { randomBytes } from 'node:crypto';
import { createDb, type DbHandle } from '../../server/db/client';
import { inject } from 'vitest';
import { adminUrl } from './global-setup';

export type TestDb = DbHandle & { url: string; name: string; drop: () => Promise<void> };

/** A fresh, migrated database of this test file's own. Call drop() in afterAll. */
export async function createTestDb(): Promise<TestDb> {
  const base = adminUrl();
  const name = `runnel_t_${randomBytes(4).toString('hex')}_${Date.now().toString(36)}`;
  const admin = new pg.Client({ connectionString: `${base}/postgres` });
  await admin.connect();
  await admin.query(`create database "${name}" template "${inject('templateDb')}"`);
  await admin.end();
  const url = `${base}/${name}`;
  const dbh = createDb(url, { max: 10 });
  return {
    ...dbh,
    url,
    name,
    drop: async () => {
      await dbh.close();
      const a = new pg.Client({ connectionString: `${base}/postgres` });
      await a.connect();
      await a.query(`drop database if exists "${name}" with (force)`);
      await a.end();
    },
  };
}
