import { loadConfig } from '../server/config';
import { createDb } from '../server/db/client';
import { seedDemo } from '../server/db/seed-demo';

const config = loadConfig();
const dbh = createDb(config.DATABASE_URL, { max: 1 });
try {
  const r = await seedDemo(dbh.db, { production: config.NODE_ENV === 'production' });
  console.error(r ? '[runnel] demo data loaded' : '[runnel] demo data already present; reusing it');
} finally {
  await dbh.close();
}
