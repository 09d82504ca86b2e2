import fs from 'node:fs';
import { parseArgs } from 'node:util';
import { z } from 'zod';
import { startSimulator } from './fleet';
import { fleetFileSchema } from './spec';

/**
 * npm run simulate -- --controllers N --seed S [--fleet path] [--broker mqtt://127.0.0.1:1883] [--port 3901]
 * Runs the first N boards of a fleet file until Ctrl-C.
 */
const usage = `usage: npm run simulate -- [--controllers N] [--seed S] [--fleet .data/demo-fleet.json]
                           [--broker mqtt://127.0.0.1:1883] [--port 3901]
                           [--sample-ms 1000] [--samples-per-message 5]`;

const intArg = (min: number, max: number) => z.coerce.number().int().min(min).max(max);

const argsSchema = z.strictObject({
  controllers: intArg(1, 100_000).optional(),
  seed: intArg(0, 2 ** 32 - 1).default(1),
  fleet: z.string().min(1).default('.data/demo-fleet.json'),
  broker: z.url({ protocol: /^(mqtt|tcp)$/ }).default(process.env.MQTT_URL ?? `mqtt://127.0.0.1:${process.env.MQTT_PORT ?? 1883}`),
  port: intArg(0, 65_535).default(Number(process.env.SIM_PORT ?? 3901)),
  'sample-ms': intArg(1, 3_600_000).default(1000),
  'samples-per-message': intArg(1, 120).default(5),
  help: z.boolean().optional(),
});

function fail(message: string): never {
  console.error(`[simulator] ${message}`);
  process.exit(2);
}

function readArgs() {
  let values: Record<string, unknown>;
  try {
    values = parseArgs({
      options: {
        controllers: { type: 'string', short: 'n' },
        seed: { type: 'string' },
        fleet: { type: 'string' },
        broker: { type: 'string' },
        port: { type: 'string' },
        'sample-ms': { type: 'string' },
        'samples-per-message': { type: 'string' },
        help: { type: 'boolean', short: 'h' },
      },
      strict: true,
      allowPositionals: false,
    }).values;
  } catch (e) {
    fail(`${(e as Error).message}\n${usage}`);
  }
  const r = argsSchema.safeParse(values);
  if (!r.success) fail(`${r.error.issues.map((i) => `--${i.path.join('.')}: ${i.message}`).join('; ')}\n${usage}`);
  if (r.data.help) {
    console.log(usage);
    process.exit(0);
  }
  return r.data;
}

function readFleet(path: string) {
  let text: string;
  try {
    text = fs.readFileSync(path, 'utf8');
  } catch {
    fail(`cannot read the fleet file ${path} (npm start's demo seed writes .data/demo-fleet.json; or pass --fleet)`);
  }
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch {
    fail(`${path} is not JSON`);
  }
  const r = fleetFileSchema.safeParse(json);
  if (!r.success) fail(`${path}: ${r.error.issues.slice(0, 5).map((i) => `${i.path.join('.')}: ${i.message}`).join('; ')}`);
  return r.data;
}

const args = readArgs();
const fleet = readFleet(args.fleet);
const n = args.controllers ?? fleet.boards.length;
if (n > fleet.boards.length) fail(`--controllers ${n} asks for more boards than ${args.fleet} has (${fleet.boards.length})`);
if (n === 0) fail(`${args.fleet} has no boards`);

const log = {
  info: (obj: object, msg: string) => console.log(`[simulator] ${msg}`, JSON.stringify(obj)),
  warn: (obj: object, msg: string) => console.warn(`[simulator] ${msg}`, JSON.stringify(obj)),
};

const sim = await startSimulator({
  brokerUrl: args.broker,
  boards: fleet.boards.slice(0, n),
  seed: args.seed,
  sampleIntervalMs: args['sample-ms'],
  samplesPerMessage: args['samples-per-message'],
  controlPort: args.port,
  controlHost: '127.0.0.1',
  log,
});
console.log(`[simulator] ${n} boards, seed ${args.seed}, broker ${args.broker}; control API on ${sim.controlUrl}`);
sim.ready().then(() => console.log(`[simulator] all ${n} boards connected`));

let stopping = false;
const stop = async (signal: string) => {
  if (stopping) return;
  stopping = true;
  console.log(`[simulator] ${signal}: stopping`);
  const force = setTimeout(() => process.exit(1), 10_000);
  force.unref();
  await sim.close();
  process.exit(0);
};
process.on('SIGINT', () => void stop('SIGINT'));
process.on('SIGTERM', () => void stop('SIGTERM'));
