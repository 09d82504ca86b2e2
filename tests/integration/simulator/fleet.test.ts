import { spawn } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startSimulator } from '../../../simulator/fleet';
import type { BoardSpec } from '../../../simulator/spec';
import { telemetrySamples } from '../../../server/contracts/protocol';
import { startBroker, startServerClient, waitFor } from './broker';

let broker: Awaited<ReturnType<typeof startBroker>>;
let server: Awaited<ReturnType<typeof startServerClient>>;
beforeAll(async () => {
  broker = await startBroker();
  server = await startServerClient(broker.url);
});
afterAll(async () => {
  await server.close();
  await broker.close();
});

const fleet = (prefix: string, n: number): BoardSpec[] =>
  Array.from({ length: n }, (_, i) => ({
    serial: `${prefix}-${String(i + 1).padStart(4, '0')}`,
    secret: `secret-${i}`,
    relayCount: 6,
    hasFlowSensor: i % 2 === 0,
    relayFlowsLpm: { 1: 10, 2: 14, 3: 6 },
    masterValveRelay: i % 3 === 0 ? 6 : null,
  }));

describe('simulated fleet', () => {
  it('connects a fleet in batches and serves the control API on loopback', async () => {
    const sim = await startSimulator({ brokerUrl: broker.url, boards: fleet('FLT', 120), seed: 3, controlPort: 0, connectBatchSize: 50, sampleIntervalMs: 200, samplesPerMessage: 2 });
    try {
      await sim.ready();
      expect([...sim.boards.values()].every((b) => b.online)).toBe(true);
      expect(sim.controlUrl).toMatch(/^http:\/\/127\.0\.0\.1:\d+$/);
      const health = await (await fetch(`${sim.controlUrl}/health`)).json();
      expect(health).toEqual({ status: 'ok', controllers: 120, online: 120 });

      const res = await fetch(`${sim.controlUrl}/controllers/FLT-0007/rain`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ tripped: true }) });
      expect(res.status).toBe(200);
      await waitFor(() => server.of('FLT-0007', 'telemetry').some((m) => telemetrySamples(m.json).some((x) => x.rain)), 'rain in telemetry');
      expect(() => sim.board('NOPE-0001')).toThrow(/No simulated board/);
      expect(sim.board('FLT-0002').spec.hasFlowSensor).toBe(false);
    } finally {
      await sim.close();
    }
    await waitFor(() => server.of('FLT-0120', 'status').at(-1)?.json.online === false, 'offline status after close');
  });

  it('runs without an HTTP API when no control port is given', async () => {
    const sim = await startSimulator({ brokerUrl: broker.url, boards: fleet('NOAPI', 2) });
    try {
      await sim.ready();
      expect(sim.controlUrl).toBeUndefined();
    } finally {
      await sim.close();
    }
  });
});

function runCli(args: string[]) {
  const child = spawn(process.execPath, ['--import', 'tsx', 'simulator/cli.ts', ...args], { cwd: fileURLToPath(new URL('../../..', import.meta.url)), stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  child.stdout.on('data', (d) => (out += d));
  child.stderr.on('data', (d) => (out += d));
  const exited = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
  return { child, output: () => out, exited };
}

describe('simulator command line', () => {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'runnel-sim-'));
  const file = path.join(dir, 'fleet.json');
  fs.writeFileSync(file, JSON.stringify({ boards: fleet('CLI', 3) }));

  it('refuses more controllers than the fleet file has, with a clear message', async () => {
    const run = runCli(['--fleet', file, '--controllers', '5', '--broker', broker.url]);
    expect(await run.exited).toBe(2);
    expect(run.output()).toMatch(/--controllers 5 asks for more boards than .* has \(3\)/);
  });

  it('refuses an argument that is not a number', async () => {
    const run = runCli(['--fleet', file, '--seed', 'abc']);
    expect(await run.exited).toBe(2);
    expect(run.output()).toMatch(/--seed/);
  });

  it('runs the first N boards and stops cleanly on Ctrl-C', async () => {
    const run = runCli(['--fleet', file, '--controllers', '2', '--seed', '9', '--broker', broker.url, '--port', '0']);
    try {
      await waitFor(() => /all 2 boards connected/.test(run.output()), 'the CLI to connect', 20_000);
      const url = run.output().match(/control API on (http:\/\/127\.0\.0\.1:\d+)/)![1];
      const list = await (await fetch(`${url}/controllers`)).json();
      expect(list.controllers.map((c: { serial: string }) => c.serial)).toEqual(['CLI-0001', 'CLI-0002']);
      run.child.kill('SIGINT');
      expect(await run.exited).toBe(0);
      await waitFor(() => server.of('CLI-0002', 'status').at(-1)?.json.online === false, 'offline status');
      expect(server.of('CLI-0003')).toHaveLength(0);
    } finally {
      run.child.kill('SIGKILL');
    }
  }, 30_000);
});
