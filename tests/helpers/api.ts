import request from 'supertest';
import type { Express } from 'express';
import { pino } from 'pino';
import { createApp } from '../../server/app';
import type { TestDb } from './db';
import { testConfig } from './config';
import { PASSWORD } from './fixtures';

export function buildTestApp(tdb: TestDb, extra: Record<string, string> = {}) {
  const config = testConfig(tdb.url, extra);
  const { app } = createApp({
    config, db: tdb.db, pool: tdb.pool, log: pino({ level: 'silent' }), sessionCookieName: 'runnel.sid', clientDir: '/nonexistent',
  });
  return { app, config };
}

/** A supertest agent signed in as the given e-mail (keeps the session cookie). */
export async function signedIn(app: Express, email: string, password = PASSWORD) {
  const agent = request.agent(app);
  const res = await agent.post('/api/auth/sign-in').send({ email, password });
  if (res.status !== 200) throw new Error(`sign-in as ${email} failed: ${res.status} ${JSON.stringify(res.body)}`);
  return agent;
}
