import { loadConfig } from '../server/config';
import { createDb } from '../server/db/client';
import { runMigrations } from '../server/db/migrate';

const config = loadConfig();
const dbh = createDb(config.DATABASE_URL, { max: 1 });
try {
  await runMigrations(dbh.db);
  console.error('[runnel] database migrations applied');
} finally {
  await dbh.close();
}
