import fs from 'node:fs';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { startSimulator } from '../simulator/fleet';
import { Uplink } from '../simulator/uplink';
import { fleetFileSchema } from '../simulator/spec';

/**
 * The simulated fleet in a process of its own for benchmarks (so it does not share the
 * server's core). argv: fleetFile brokerUrl sampleMs samplesPerMessage. On SIGINT it stops
 * every board (each flushes and waits for its PUBACKs) and prints its totals as JSON.
 */
const [fleetFile, brokerUrl, sampleMs, perMsg] = process.argv.slice(2);
const fleet = fleetFileSchema.parse(JSON.parse(fs.readFileSync(fleetFile, 'utf8')));
const sim = await startSimulator({ brokerUrl, boards: fleet.boards, seed: 42, sampleIntervalMs: Number(sampleMs), samplesPerMessage: Number(perMsg), samplesInBursts: Number(perMsg) > 1, connectBatchSize: 100 });
await sim.ready();
process.stdout.write(JSON.stringify({ ready: true }) + '\n');
// BENCH_VERBOSE: every 5 s, how late this process's event loop runs and how many messages wait
// for their turn to be handed to mqtt.js (a backlog here is the simulator's, not the product's).
if (process.env.BENCH_VERBOSE) {
  const h = monitorEventLoopDelay({ resolution: 10 });
  h.enable();
  setInterval(() => {
    const U = Uplink.waiting;
    process.stderr.write(`[sim] loop delay p50 ${Math.round(h.percentile(50) / 1e6)} p99 ${Math.round(h.percentile(99) / 1e6)} max ${Math.round(h.max / 1e6)} ms; ${U} messages waiting to be handed over\n`);
    h.reset();
  }, 5000).unref();
}
process.on('SIGINT', async () => {
  await sim.close();
  let sent = 0;
  let taken = 0;
  let dropped = 0;
  for (const b of sim.boards.values()) {
    sent += b.stats.samplesSent;
    taken += b.stats.samplesTaken;
    dropped += b.stats.samplesDropped;
  }
  // Each board's relay start times, for the schedule benchmark's lateness and stagger.
  const energized = process.env.SIM_REPORT_ENERGIZE ? Object.fromEntries([...sim.boards].map(([serial, b]) => [serial, b.energizeLog.map((e) => e.atMs)])) : undefined;
  process.stdout.write(JSON.stringify({ done: true, sent, taken, dropped, energized }) + '\n');
  process.exit(0);
});
