import fs from 'node:fs';
import path from 'node:path';
import type { Runtime } from './runtime';
import { controllers } from './db/schema/index';
import { provisionBoards, type BoardSpecRow } from './services/device-secrets';

export const DEMO_FLEET_FILE = path.resolve(process.env.DEMO_FLEET_FILE ?? '.data/demo-fleet.json');

/**
 * Demo mode: give every demo controller a secret (kept in a git-ignored file, as a technician
 * would keep the setup sheets) and run the simulated fleet against the broker, with its control
 * API on SIM_PORT.
 */
export async function startDemoFleet(rt: Runtime): Promise<void> {
  const { db } = rt.dbh;
  let boards: BoardSpecRow[] | null = null;
  if (fs.existsSync(DEMO_FLEET_FILE)) {
    try {
      boards = (JSON.parse(fs.readFileSync(DEMO_FLEET_FILE, 'utf8')) as { boards: BoardSpecRow[] }).boards;
      const active = await db.select({ serial: controllers.serial, hash: controllers.secretHash }).from(controllers);
      const known = new Map(active.map((c) => [c.serial, c.hash]));
      if (boards.some((b) => !known.get(b.serial)) || active.some((c) => !boards!.some((b) => b.serial === c.serial))) boards = null;
    } catch {
      boards = null;
    }
  }
  if (!boards) {
    boards = await provisionBoards(db);
    fs.mkdirSync(path.dirname(DEMO_FLEET_FILE), { recursive: true });
    fs.writeFileSync(DEMO_FLEET_FILE, JSON.stringify({ boards }, null, 2), { mode: 0o600 });
    rt.log.info({ file: DEMO_FLEET_FILE, boards: boards.length }, 'demo boards provisioned');
  }
  const { startSimulator } = await import('../simulator/fleet');
  const sim = await startSimulator({
    brokerUrl: rt.mqttUrl!,
    boards: boards as never,
    seed: 2026,
    controlPort: rt.config.SIM_PORT,
    sampleIntervalMs: 2000,
    samplesPerMessage: 5,
  });
  rt.extras.push({ name: 'simulator', close: () => sim.close() });
  rt.services.demo.simulatorUrl = sim.controlUrl;
  rt.log.info({ control: sim.controlUrl, boards: boards.length }, 'simulated demo fleet running');
}
