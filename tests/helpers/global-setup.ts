import pg from 'pg';
import { createDb } from '../../server/db/client';
import { runMigrations } from '../../server/db/migrate';

/**
 * Builds one migrated template database per test run; every test file then clones it
 * (CREATE DATABASE … TEMPLATE), which takes a few milliseconds and keeps files isolated.
 */
export const TEMPLATE_PREFIX = 'runnel_tpl_';

export function adminUrl(): string {
  const u = process.env.TEST_ADMIN_DATABASE_URL;
  if (!u) throw new Error('TEST_ADMIN_DATABASE_URL is not set: run the suite with `npm test`, which starts PostgreSQL');
  return u;
}

/** Each run has its own template, so two runs on one machine never touch each other's databases. */
export default async function setup({ provide }: { provide: (key: 'templateDb', value: string) => void }) {
  const base = adminUrl();
  const name = `${TEMPLATE_PREFIX}${process.pid}_${Date.now().toString(36)}`;
  const admin = new pg.Client({ connectionString: `${base}/postgres` });
  await admin.connect();
  // Drop what interrupted runs left behind: names end in their creation time (base 36 ms);
  // only those older than three hours go, so a run in parallel keeps its own.
  const old = await admin.query(`select datname from pg_database where datname like 'runnel_t_%' or datname like '${TEMPLATE_PREFIX}%'`);
  for (const r of old.rows as { datname: string }[]) {
    const born = parseInt(r.datname.split('_').pop() ?? '', 36);
    if (!Number.isFinite(born) || Date.now() - born > 3 * 3_600_000) await admin.query(`drop database if exists "${r.datname}" with (force)`).catch(() => {});
  }
  await admin.query(`create database "${name}"`);
  await admin.end();
  const dbh = createDb(`${base}/${name}`, { max: 1 });
  await runMigrations(dbh.db);
  await dbh.close();
  provide('templateDb', name);
  return async () => {
    const a = new pg.Client({ connectionString: `${base}/postgres` });
    await a.connect();
    await a.query(`drop database if exists "${name}" with (force)`).catch(() => {});
    await a.end();
  };
}

declare module 'vitest' {
  export interface ProvidedContext {
    templateDb: string;
  }
}
