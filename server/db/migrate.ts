import { migrate } from 'drizzle-orm/node-postgres/migrator';
import path from 'node:path';
import { projectRoot } from '../paths';
import type { Db } from './client';

export const migrationsFolder = path.join(projectRoot, 'drizzle');

/** Apply drizzle-kit's migrations with the same driver the app uses. */
export async function runMigrations(db: Db): Promise<void> {
  await migrate(db, { migrationsFolder });
}
