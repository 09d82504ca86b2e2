import { expect } from 'vitest';
import { DateTime } from 'luxon';
import { eq, sql } from 'drizzle-orm';
import type { Db } from '../../server/db/client';
import { programZones, programs, runs, zoneRuns, zones } from '../../server/db/schema/index';
import { programCrons } from '../../server/scheduler/calendar';
import type { Fixture } from './fixtures';

/** A program on site A that starts at the next whole minute: zone A1 for 15 s, then A2 for 15 s. */
export async function nextMinuteProgram(db: Db, f: Fixture, name: string): Promise<{ programId: number; zoneA2: number }> {
  const [a2] = await db.select({ id: zones.id }).from(zones).where(eq(zones.name, 'A2'));
  const start = DateTime.now().setZone('America/Denver').plus({ seconds: 5 }).startOf('minute').plus({ minutes: 1 });
  const startTimes = [start.toFormat('HH:mm')];
  const dayRule = { kind: 'weekdays' as const, weekdays: [0, 1, 2, 3, 4, 5, 6] };
  const [p] = await db.insert(programs).values({ siteId: f.siteA, name, startTimes, dayRule, crons: programCrons({ startTimes, dayRule, activeFrom: null, activeTo: null }) }).returning();
  await db.insert(programZones).values([
    { programId: p.id, zoneId: f.zoneA, minutes: 0.25, position: 1, cycleSoak: 'off' },
    { programId: p.id, zoneId: a2.id, minutes: 0.25, position: 2, cycleSoak: 'off' },
  ]);
  return { programId: p.id, zoneA2: a2.id };
}

/** The program's run ended once, with both zone runs in the record, none doubled, and A2 completed under the new dispatcher. */
export async function expectOneFinishedRun(db: Db, f: Fixture, programId: number, zoneA2: number, until: (fn: () => Promise<unknown>, ms: number, step: number) => Promise<unknown>) {
  await until(async () => (await db.select().from(runs).where(eq(runs.programId, programId)))[0]?.state !== 'running', 150_000, 500);
  const rs = await db.select().from(runs).where(eq(runs.programId, programId));
  expect(rs).toHaveLength(1);
  const zr = await db.select().from(zoneRuns).where(eq(zoneRuns.runId, rs[0].id));
  expect(zr.map((z) => z.zoneId).sort()).toEqual([f.zoneA, zoneA2].sort());
  expect(zr.every((z) => z.state !== 'running' && z.state !== 'planned')).toBe(true);
  expect(zr.find((z) => z.zoneId === zoneA2)!.state).toBe('completed');
  const dup = await db.execute(sql`select zone_id from zone_runs where run_id = ${rs[0].id} group by zone_id, cycle having count(*) > 1`);
  expect(dup.rows).toEqual([]);
}
