import { randomBytes } from 'node:crypto';
import argon2 from 'argon2';
import { eq, inArray, isNull, and } from 'drizzle-orm';
import type { Db } from '../db/client';
import { controllers, zones } from '../db/schema/index';
import { ARGON2_OPTIONS } from './auth';

/** A board secret: 24 random bytes, URL-safe. Shown once; only its argon2id hash is stored. */
export function generateDeviceSecret(): string {
  return randomBytes(24).toString('base64url');
}

export const hashDeviceSecret = (secret: string) => argon2.hash(secret, ARGON2_OPTIONS);

/** Give a controller a new secret (the old one stops working) and return it. */
export async function rotateDeviceSecret(db: Db, controllerId: number): Promise<string> {
  const secret = generateDeviceSecret();
  await db.update(controllers).set({ secretHash: await hashDeviceSecret(secret) }).where(eq(controllers.id, controllerId));
  return secret;
}

export type BoardSpecRow = {
  serial: string;
  secret: string;
  relayCount: number;
  hasFlowSensor: boolean;
  masterValveRelay: number | null;
  relayFlowsLpm: Record<number, number>;
};

/** New secrets for the given controllers (all active ones when omitted), with what a simulated board needs to know. */
export async function provisionBoards(db: Db, controllerIds?: number[]): Promise<BoardSpecRow[]> {
  const cs = await db
    .select()
    .from(controllers)
    .where(controllerIds ? and(inArray(controllers.id, controllerIds), isNull(controllers.retiredAt)) : isNull(controllers.retiredAt));
  const zs = cs.length ? await db.select().from(zones).where(inArray(zones.controllerId, cs.map((c) => c.id))) : [];
  const out: BoardSpecRow[] = [];
  for (const c of cs) {
    const secret = await rotateDeviceSecret(db, c.id);
    out.push({
      serial: c.serial,
      secret,
      relayCount: c.relayCount,
      hasFlowSensor: c.hasFlowSensor,
      masterValveRelay: c.masterValveRelay,
      relayFlowsLpm: Object.fromEntries(zs.filter((z) => z.controllerId === c.id).map((z) => [z.relay, z.headCount * z.flowPerHeadLpm])),
    });
  }
  return out;
}
