import { startRuntime, type Runtime } from '../../server/runtime';
import { seedDemo, type SeedResult } from '../../server/db/seed-demo';
import { createTestDb, type TestDb } from './db';
import { testConfig } from './config';

export type TestRuntime = { rt: Runtime; tdb: TestDb; seed: SeedResult; close: () => Promise<void> };

/** The whole product on a random loopback port, on a fresh database loaded with the demo scenario. */
export async function startDemoRuntime(extra: Record<string, string> = {}): Promise<TestRuntime> {
  const tdb = await createTestDb();
  const seed = (await seedDemo(tdb.db))!;
  // RUNNEL_TEST_CLIENT_DIR: a client built elsewhere than dist/ (two people building at once)
  const rt = await startRuntime(testConfig(tdb.url, { RUNNEL_DEMO: '1', ...extra }), { clientDir: process.env.RUNNEL_TEST_CLIENT_DIR || undefined });
  return {
    rt, tdb, seed,
    close: async () => {
      await rt.close();
      await tdb.drop();
    },
  };
}
