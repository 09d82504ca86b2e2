import pg from 'pg';
import { createDb } from '../../server/db/client';
import { runMigrations } from '../../server/db/migrate';

/**
 * Builds one migrated template database per test run; every test file then clones it
 * (CREATE DATABASE … TEMPLATE), which takes a few milliseconds and keeps files isolated.
 */
export const TEMPLATE_DB = 'runnel_test_template';

export function adminUrl(): string {
  const u = process.env.TEST_ADMIN_DATABASE_URL;
  if (!u) throw new Error('TEST_ADMIN_DATABASE_URL is not set: run the suite with `npm test`, which starts PostgreSQL');
  return u;
}

export default async function setup() {
  const base = adminUrl();
  const admin = new pg.Client({ connectionString: `${base}/postgres` });
  await admin.connect();
  // Drop what an earlier, interrupted run left behind.
  const old = await admin.query(`select datname from pg_database where datname like 'runnel_t_%' or datname = $1`, [TEMPLATE_DB]);
  for (const r of old.rows) await admin.query(`drop database if exists "${r.datname}" with (force)`);
  await admin.query(`create database "${TEMPLATE_DB}"`);
  await admin.end();
  const dbh = createDb(`${base}/${TEMPLATE_DB}`, { max: 1 });
  await runMigrations(dbh.db);
  await dbh.close();
}
