import { DateTime } from 'luxon';
import { sql } from 'drizzle-orm';
import { programZones, programs } from '../server/db/schema/index';
import { programCrons } from '../server/scheduler/calendar';
import { startRuntime } from '../server/runtime';
import { spawn } from 'node:child_process';
import fs from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import readline from 'node:readline';
import { benchConfig, benchDb, nodeProgram, percentile, round, sleep, startProfile } from './common';
import { buildFleet } from './fleet-world';

export type ScheduleResult = { zones: number; controllers: number; latenessP50Ms: number; latenessP99Ms: number; minStaggerGapMs: number; staggerSettingMs: number; opened: number };

/**
 * 10,000 zones due in the same minute. A board has at most 8 relays, so the zones sit on 1,250
 * boards (8 each, all allowed open at once, sites with ample supply). Lateness = when the board
 * energised the relay minus the planned start; the stagger gap is measured between relay starts
 * on each board.
 */
export async function benchSchedule(opts: { zones?: number; staggerMs?: number } = {}): Promise<ScheduleResult> {
  const zonesTotal = opts.zones ?? 10_000;
  const perBoard = 8;
  const boardsN = Math.ceil(zonesTotal / perBoard);
  const stagger = opts.staggerMs ?? 50;
  const db = await benchDb('schedule');
  const { boards, siteIds } = await buildFleet(db, boardsN, { zonesPer: perBoard, relayCount: 8, cap: 8, staggerMs: stagger });
  const rt = await startRuntime(benchConfig(db.url, { SCHEDULER: '1', SCHEDULER_TICK_MS: '1000', ACK_TIMEOUT_MS: '10000', RECONCILE_DELAY_MS: '60000' }));
  // the boards in a process of their own, as in the ingest benchmark, so they do not share the server's core
  const fleetFile = path.join(os.tmpdir(), `runnel-bench-schedule-${boardsN}.json`);
  fs.writeFileSync(fleetFile, JSON.stringify({ boards }));
  const child = spawn(process.execPath, [...(process.env.BENCH_PROFILE ? ['--cpu-prof', `--cpu-prof-dir=${process.env.BENCH_PROFILE}`] : []), ...nodeProgram('sim-child', 'bench/sim-child.ts'), fleetFile, rt.mqttUrl!, '300000', '1'], {
    stdio: ['ignore', 'pipe', 'inherit'],
    env: { ...process.env, SIM_REPORT_ENERGIZE: '1' },
  });
  const lines = readline.createInterface({ input: child.stdout! });
  const msgs: Record<string, unknown>[] = [];
  lines.on('line', (l) => {
    try {
      msgs.push(JSON.parse(l));
    } catch {
      /* not ours */
    }
  });
  const waitFor = async (key: string) => {
    for (;;) {
      const hit = msgs.find((m) => key in m);
      if (hit) return hit;
      await sleep(100);
    }
  };
  await waitFor('ready');
  while (rt.services.fleet.all().filter((b) => b.online).length < boardsN) await sleep(200);
  // every site's program starts at the next whole minute at least 40 s away
  const start = DateTime.now().setZone('America/Denver').plus({ seconds: 40 }).startOf('minute').plus({ minutes: 1 });
  const startTimes = [start.toFormat('HH:mm')];
  const dayRule = { kind: 'weekdays' as const, weekdays: [0, 1, 2, 3, 4, 5, 6] };
  const zoneBySite = new Map<number, number[]>();
  const rows = await db.db.execute(sql`select z.id, c.site_id from zones z join controllers c on c.id = z.controller_id order by z.id`);
  for (const r of rows.rows as { id: number; site_id: number }[]) zoneBySite.set(r.site_id, [...(zoneBySite.get(r.site_id) ?? []), r.id]);
  for (const siteId of siteIds) {
    const [p] = await db.db.insert(programs).values({ siteId, name: 'Bench', startTimes, dayRule, crons: programCrons({ startTimes, dayRule, activeFrom: null, activeTo: null }) }).returning();
    await db.db.insert(programZones).values((zoneBySite.get(siteId) ?? []).map((zoneId, i) => ({ programId: p.id, zoneId, minutes: 1, position: i + 1, cycleSoak: 'off' as const })));
  }
  const startMs = start.toMillis();
  // BENCH_PROFILE=dir: profile the server from 12 s before the start (the zones' preparation) to 8 s after
  await sleep(Math.max(0, startMs - 12_000 - Date.now()));
  const profiler = process.env.BENCH_PROFILE ? await startProfile() : null;
  await sleep(Math.max(0, startMs + 8_000 - Date.now()));
  if (profiler) await profiler.stop(path.join(process.env.BENCH_PROFILE!, `schedule-${zonesTotal}.cpuprofile`));
  await sleep(Math.max(0, startMs + 15_000 - Date.now()));
  // stop the boards (their relay start times come back with their totals); the runs' end is not measured
  child.kill('SIGINT');
  const { energized } = (await waitFor('done')) as { energized: Record<string, number[]> };
  const lateness: number[] = [];
  let minGap = Infinity;
  for (const times of Object.values(energized)) {
    const log = times.filter((t) => t >= startMs - 1000).sort((x, y) => x - y);
    for (const t of log) lateness.push(t - startMs);
    for (let i = 1; i < log.length; i++) minGap = Math.min(minGap, log[i] - log[i - 1]);
  }
  const opened = lateness.length;
  // Where the time went, from the records: run created, command recorded, sent, acknowledged (ms after the planned start).
  const stages = (await db.db.execute(sql`
    select
      percentile_cont(0.5) within group (order by extract(epoch from r.created_at - r.scheduled_for) * 1000) as run_created,
      percentile_cont(0.5) within group (order by extract(epoch from c.created_at - r.scheduled_for) * 1000) as command_recorded,
      percentile_cont(0.5) within group (order by extract(epoch from c.sent_at - r.scheduled_for) * 1000) as sent_p50,
      percentile_cont(0.99) within group (order by extract(epoch from c.sent_at - r.scheduled_for) * 1000) as sent_p99,
      percentile_cont(0.5) within group (order by extract(epoch from c.acked_at - r.scheduled_for) * 1000) as acked_p50
    from zone_runs z join runs r on r.id = z.run_id join commands c on c.id = z.command_id`)).rows[0];
  if (process.env.BENCH_VERBOSE) {
    console.error('schedule stages (ms after planned start, p50):', JSON.stringify(stages));
    const one = await db.db.execute(sql`
      select c.relay, round(extract(epoch from c.created_at - r.scheduled_for) * 1000) as rec, round(extract(epoch from c.sent_at - r.scheduled_for) * 1000) as sent,
        round(extract(epoch from c.acked_at - r.scheduled_for) * 1000) as acked
      from zone_runs z join runs r on r.id = z.run_id join commands c on c.id = z.command_id
      where c.controller_id = (select min(controller_id) from commands) order by c.sent_at`);
    console.error('one board:', JSON.stringify(one.rows));
  }
  await rt.close();
  fs.rmSync(fleetFile, { force: true });
  await db.drop();
  return {
    zones: zonesTotal, controllers: boardsN,
    latenessP50Ms: round(percentile(lateness, 50)), latenessP99Ms: round(percentile(lateness, 99)),
    minStaggerGapMs: Number.isFinite(minGap) ? round(minGap) : NaN, staggerSettingMs: stagger, opened,
  };
}
